package splits

import (
	"bufio"
	"context"
	"database/sql"
	"encoding/csv"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"strconv"
	"strings"
)

// ExportOptions choose what Export writes.
type ExportOptions struct {
	Split  string
	Side   string
	Fold   int    // 0: the whole side; k: the rows of fold k (Part says which part)
	Part   string // with Fold: "test" (default: rows with fold = k) or "train"
	Format string // csv (default) or jsonl
	System bool   // include ss_row, ss_source, ss_line, ss_digest, ss_norm_digest (when the table has it)
}

// Export streams one side (or one fold's part of it) of a split to w, in ss_row order, and
// returns the number of rows written. CSV has a header; NULL is an empty field. JSON Lines
// has one object per row with the column names as keys (NULL as null).
func Export(ctx context.Context, conn *sql.Conn, o ExportOptions, w io.Writer) (int64, error) {
	var table string
	var scheme sql.NullString
	err := conn.QueryRowContext(ctx, `SELECT table_name, fold_scheme FROM ss_splits WHERE split_name = ?`, o.Split).Scan(&table, &scheme)
	if errors.Is(err, sql.ErrNoRows) {
		return 0, fieldErr("split", "no split %q (list them with: splitsmith splits)", o.Split)
	}
	if err != nil {
		return 0, fmt.Errorf("export %s: %w", o.Split, err)
	}
	var sides []string
	q, err := conn.QueryContext(ctx, `SELECT side FROM ss_split_sides WHERE split_name = ? ORDER BY position`, o.Split)
	if err != nil {
		return 0, err
	}
	found := false
	for q.Next() {
		var s string
		q.Scan(&s)
		sides = append(sides, s)
		found = found || s == o.Side
	}
	q.Close()
	if !found {
		return 0, &FieldError{Field: "side", Msg: fmt.Sprintf("split %s has no side %q (sides: %s)", o.Split, o.Side, strings.Join(sides, ", "))}
	}
	where := `r.split_name = ? AND r.side = ?`
	args := []any{o.Split, o.Side}
	if o.Fold != 0 {
		var k int
		conn.QueryRowContext(ctx, `SELECT count(*) FROM ss_split_folds WHERE split_name = ? AND fold = ?`, o.Split, o.Fold).Scan(&k)
		if k == 0 {
			return 0, &FieldError{Field: "fold", Msg: fmt.Sprintf("split %s has no fold %d", o.Split, o.Fold)}
		}
		switch {
		case o.Part == "" || o.Part == "test":
			where += ` AND r.fold = ?`
		case o.Part == "train" && scheme.String == "rolling":
			where += ` AND r.train_from <= ?`
		case o.Part == "train":
			where += ` AND r.fold IS NOT NULL AND r.fold <> ?`
		default:
			return 0, &FieldError{Field: "part", Msg: fmt.Sprintf("%q is not one of test, train", o.Part)}
		}
		args = append(args, o.Fold)
	} else if o.Part != "" {
		return 0, &FieldError{Field: "part", Msg: "needs --fold"}
	}
	t, err := ReadTable(ctx, conn, table)
	if err != nil {
		return 0, err
	}
	var cols []string
	if o.System {
		cols = append(cols, t.system...)
	}
	for _, c := range t.Columns {
		cols = append(cols, c.Name)
	}
	sel := make([]string, len(cols))
	for i, c := range cols {
		sel[i] = "t." + quoteIdent(c)
	}
	rows, err := conn.QueryContext(ctx, `SELECT `+strings.Join(sel, ", ")+` FROM ss_split_rows AS r JOIN `+quoteIdent(table)+` AS t ON t.ss_row = r.row_id WHERE `+where+` ORDER BY r.row_id`, args...)
	if err != nil {
		return 0, fmt.Errorf("export %s: %w", o.Split, err)
	}
	defer rows.Close()
	bw := bufio.NewWriterSize(w, 64<<10)
	vals := make([]any, len(cols))
	ptrs := make([]any, len(cols))
	for i := range vals {
		ptrs[i] = &vals[i]
	}
	var n int64
	var cw *csv.Writer
	rec := make([]string, len(cols))
	if o.Format == "" || o.Format == "csv" {
		cw = csv.NewWriter(bw)
		cw.Write(cols)
	} else if o.Format != "jsonl" {
		return 0, &FieldError{Field: "format", Msg: fmt.Sprintf("%q is not one of csv, jsonl", o.Format)}
	}
	keys := make([][]byte, len(cols))
	for i, c := range cols {
		keys[i], _ = json.Marshal(c)
	}
	var line []byte
	for rows.Next() {
		if err := rows.Scan(ptrs...); err != nil {
			return n, err
		}
		if cw != nil {
			for i, v := range vals {
				rec[i] = csvValue(v)
			}
			if err := cw.Write(rec); err != nil {
				return n, err
			}
		} else {
			line = append(line[:0], '{')
			for i, v := range vals {
				if i > 0 {
					line = append(line, ',')
				}
				line = append(line, keys[i]...)
				line = append(line, ':')
				line = appendJSONValue(line, v)
			}
			line = append(line, '}', '\n')
			if _, err := bw.Write(line); err != nil {
				return n, err
			}
		}
		n++
	}
	if err := rows.Err(); err != nil {
		return n, err
	}
	if cw != nil {
		cw.Flush()
		if err := cw.Error(); err != nil {
			return n, err
		}
	}
	return n, bw.Flush()
}

// csvValue is label with NULL as the empty field.
func csvValue(v any) string {
	if normalize(v) == nil {
		return ""
	}
	return label(v)
}

func appendJSONValue(b []byte, v any) []byte {
	switch x := normalize(v).(type) {
	case nil:
		return append(b, "null"...)
	case int64:
		return strconv.AppendInt(b, x, 10)
	case float64:
		return strconv.AppendFloat(b, x, 'g', -1, 64)
	case string:
		j, _ := json.Marshal(x)
		return append(b, j...)
	}
	j, _ := json.Marshal(v)
	return append(b, j...)
}
