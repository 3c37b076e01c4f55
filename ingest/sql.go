package ingest

import (
	"database/sql/driver"

	"splitsmith/internal/sqlfn"
)

// SQL returns the SQL functions this package declares (see DEVELOPERS.md).
func SQL() (set sqlfn.Set) {
	defer func() { set.Funcs = append(set.Funcs, profileFuncs()...) }() // the profile's, profile_sql.go
	return sqlfn.Set{Package: "ingest", Funcs: []sqlfn.Func{
		{
			Name: "ingest_digest", NArgs: -1, Deterministic: true, Args: "v1, ..., vn",
			Doc: "the content digest of a row's values in column order, as stored in ss_digest (NULL is a value, not propagated)",
			Examples: []sqlfn.Example{
				{SQL: "SELECT ingest_digest(42, 'río', NULL, 0.1)", Want: "1854158007365103010"},
				{SQL: "SELECT ingest_digest('abc')", Want: "676040571582008822"},
			},
			Scalar: func(args []driver.Value) (driver.Value, error) {
				vals := make([]any, len(args))
				for i, a := range args {
					vals[i] = a
				}
				return Digest(vals...)
			},
		},
		{
			Name: "ingest_infer_type", NArgs: 1, Deterministic: true, Args: "text",
			Doc: "the type ingest would infer for a column holding only this value: INTEGER, REAL, BOOLEAN, DATE, TIMESTAMP, TEXT, or MISSING for a default missing token",
			Examples: []sqlfn.Example{
				{SQL: "SELECT ingest_infer_type('42')", Want: "INTEGER"},
				{SQL: "SELECT ingest_infer_type('00123')", Want: "TEXT"},
				{SQL: "SELECT ingest_infer_type('2024-03-01 08:15')", Want: "TIMESTAMP"},
				{SQL: "SELECT ingest_infer_type('NA')", Want: "MISSING"},
			},
			Scalar: func(args []driver.Value) (driver.Value, error) {
				if sqlfn.IsNull(args, 0) {
					return nil, nil
				}
				s, err := sqlfn.Text(args, 0, "text")
				if err != nil {
					return nil, err
				}
				t, ok := InferValue(s, nil)
				if !ok {
					return "MISSING", nil
				}
				return t.String(), nil
			},
		},
		{
			Name: "ingest_norm", NArgs: 1, Deterministic: true, Args: "text",
			Doc: "text normalised for duplicate checks: trimmed, inner whitespace collapsed to one space, lower-cased",
			Examples: []sqlfn.Example{
				{SQL: "SELECT ingest_norm('  Cast  IRON ')", Want: "cast iron"},
			},
			Scalar: func(args []driver.Value) (driver.Value, error) {
				if sqlfn.IsNull(args, 0) {
					return nil, nil
				}
				s, err := sqlfn.Text(args, 0, "text")
				if err != nil {
					return nil, err
				}
				return Norm(s), nil
			},
		},
	}}
}
