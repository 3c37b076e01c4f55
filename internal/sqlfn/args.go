package sqlfn

import (
	"database/sql/driver"
	"fmt"
	"math"
	"strconv"
	"time"
)

// TypeName names the SQLite storage class of a driver value, for messages.
func TypeName(v driver.Value) string {
	switch v.(type) {
	case nil:
		return "NULL"
	case int64:
		return "INTEGER"
	case float64:
		return "REAL"
	case string:
		return "TEXT"
	case []byte:
		return "BLOB"
	case bool:
		return "INTEGER"
	case time.Time:
		return "TEXT"
	}
	return fmt.Sprintf("%T", v)
}

func argErr(args []driver.Value, i int, name, want string) error {
	return fmt.Errorf("argument %d (%s) must be %s, got %s", i+1, name, want, TypeName(args[i]))
}

// IsNull reports whether argument i is NULL.
func IsNull(args []driver.Value, i int) bool { return args[i] == nil }

// Int returns argument i as an integer. A REAL with an integral value is accepted; TEXT is not.
func Int(args []driver.Value, i int, name string) (int64, error) {
	switch v := args[i].(type) {
	case int64:
		return v, nil
	case bool:
		if v {
			return 1, nil
		}
		return 0, nil
	case float64:
		if v == math.Trunc(v) && math.Abs(v) < 1<<53 {
			return int64(v), nil
		}
	}
	return 0, argErr(args, i, name, "INTEGER")
}

// Float returns argument i as a float. INTEGER is widened; TEXT is parsed only when it is a
// plain decimal number.
func Float(args []driver.Value, i int, name string) (float64, error) {
	switch v := args[i].(type) {
	case int64:
		return float64(v), nil
	case float64:
		return v, nil
	case string:
		if f, err := strconv.ParseFloat(v, 64); err == nil {
			return f, nil
		}
	}
	return 0, argErr(args, i, name, "REAL")
}

// Text returns argument i as text. INTEGER and REAL are rendered as SQLite would; BLOB bytes
// are taken as they are.
func Text(args []driver.Value, i int, name string) (string, error) {
	switch v := args[i].(type) {
	case string:
		return v, nil
	case []byte:
		return string(v), nil
	case int64:
		return strconv.FormatInt(v, 10), nil
	case float64:
		return strconv.FormatFloat(v, 'g', -1, 64), nil
	case time.Time:
		return v.UTC().Format(time.RFC3339Nano), nil
	}
	return "", argErr(args, i, name, "TEXT")
}

// Bytes returns argument i as bytes: BLOB as is, TEXT as its UTF-8 bytes, INTEGER and REAL
// as their text.
func Bytes(args []driver.Value, i int, name string) ([]byte, error) {
	if b, ok := args[i].([]byte); ok {
		return b, nil
	}
	s, err := Text(args, i, name)
	return []byte(s), err
}

// Render prints a result value the way examples state it.
func Render(v any) string {
	switch x := v.(type) {
	case nil:
		return "NULL"
	case int64:
		return strconv.FormatInt(x, 10)
	case float64:
		return strconv.FormatFloat(x, 'g', -1, 64)
	case []byte:
		return fmt.Sprintf("x'%x'", x)
	case string:
		return x
	case bool:
		if x {
			return "1"
		}
		return "0"
	}
	return fmt.Sprint(v)
}
