package ingest

import (
	"database/sql/driver"
	"fmt"
	"math"
	"strconv"

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
			Name: "ingest_norm_term", NArgs: 2, Deterministic: true, Args: "pos, norm",
			Doc: "one value's term of the normalised digest (ss_norm_digest): pos is the column's 1-based position, norm its normalised text or NULL",
			Examples: []sqlfn.Example{
				{SQL: "SELECT ingest_norm_term(1, 'cast iron')", Want: "7959175019168693180"},
				{SQL: "SELECT ingest_norm_term(2, NULL)", Want: "-8295276720888618180"},
			},
			Scalar: func(args []driver.Value) (driver.Value, error) {
				pos, err := sqlfn.Int(args, 0, "pos")
				if err != nil {
					return nil, err
				}
				if pos < 1 || pos > math.MaxInt32 {
					return nil, fmt.Errorf("argument 1 (pos) must be a column position from 1, got %d", pos)
				}
				norm, null, err := normArg(args, 1, "norm")
				if err != nil {
					return nil, err
				}
				return int64(NormTerm(int(pos), norm, null)), nil
			},
		},
		{
			Name: "ingest_norm_digest", NArgs: -1, Deterministic: true, Args: "t1, ..., tn",
			Doc: "the normalised digest of a row, as stored in ss_norm_digest: the sum mod 2^64 of ingest_norm_term(i, ti) over already-normalised texts in column order (NULL is a value, not propagated)",
			Examples: []sqlfn.Example{
				{SQL: "SELECT ingest_norm_digest('cast iron', NULL, 42, '1.50000000e+00')", Want: "-1781022874211523639"},
				{SQL: "SELECT ingest_norm_digest(lower(trim('  Cast IRON ')), NULL, 42, printf('%.8e', 1.5))", Want: "-1781022874211523639"},
			},
			Scalar: func(args []driver.Value) (driver.Value, error) {
				var sum uint64
				for i := range args {
					norm, null, err := normArg(args, i, "t"+strconv.Itoa(i+1))
					if err != nil {
						return nil, err
					}
					sum += NormTerm(i+1, norm, null)
				}
				return int64(sum), nil
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
			Doc: "text as the normalised digest (ss_norm_digest) and the audit's exact-duplicate check normalise it: tabs, CR and LF become spaces, runs of spaces collapse to one, the ends are trimmed, ASCII letters are lower-cased (as SQLite's lower() does); leak_norm is the same",
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
				return NormalizeText(s), nil
			},
		},
	}}
}
