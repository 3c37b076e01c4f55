package splits

import (
	"database/sql/driver"
	"fmt"
	"strconv"

	"splitsmith/ingest"
)

// The bulk paths (reading a million keys, writing a million assignment rows) go through the
// driver's own statement interface inside conn.Raw: database/sql's per-row Scan conversion and
// per-statement argument conversion cost more than SQLite's own work here. The values are
// the same ones database/sql would hand over (int64, float64, string, []byte, nil).
// Inside fn nothing may use conn itself (database/sql holds the connection's lock).

// rawQuery is ingest.QueryRaw: one row at a time through the driver, vals reused.
var rawQuery = ingest.QueryRaw

// rawPrepare is ingest.PrepareRaw: a statement of the driver, executed without database/sql.
var rawPrepare = ingest.PrepareRaw

// asInt64 converts a driver value to int64 as database/sql's Scan into *int64 does.
func asInt64(v driver.Value, col string) (int64, error) {
	var s string
	switch x := v.(type) {
	case int64:
		return x, nil
	case float64:
		s = strconv.FormatFloat(x, 'g', -1, 64)
	case string:
		s = x
	case []byte:
		s = string(x)
	case bool:
		s = strconv.FormatBool(x)
	default:
		return 0, fmt.Errorf("column %s: converting %T to int64 is unsupported", col, v)
	}
	n, err := strconv.ParseInt(s, 10, 64)
	if err != nil {
		return 0, fmt.Errorf("column %s: converting %T %q to int64: %w", col, v, s, err)
	}
	return n, nil
}
