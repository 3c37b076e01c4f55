package ingest

import (
	"database/sql/driver"
	"fmt"
	"math"
	"slices"

	"splitsmith/internal/sqlfn"
)

// profileFuncs are the profile's SQL functions (appended to SQL() in sql.go): the same Go
// code the profile uses, so an auditor can recompute any stored statistic in plain SQL.
func profileFuncs() []sqlfn.Func {
	return []sqlfn.Func{
		{
			Name: "ingest_mean", NArgs: 1, Deterministic: true, Args: "x",
			Doc: "aggregate: the mean of the non-NULL x by the corrected two-pass algorithm with compensated sums (NULL for no rows)",
			Examples: []sqlfn.Example{
				{SQL: "SELECT ingest_mean(x) FROM (SELECT 10000000.1 AS x UNION ALL SELECT 10000000.3 UNION ALL SELECT NULL)", Want: "1.00000002e+07"},
			},
			NewAgg: func() sqlfn.Agg {
				return &valuesAgg{final: func(x []float64, _ float64) any { return nanNull(Mean(x)) }}
			},
		},
		{
			Name: "ingest_stddev", NArgs: 1, Deterministic: true, Args: "x",
			Doc: "aggregate: the sample standard deviation (denominator n-1) of the non-NULL x, numerically stable (NULL for fewer than 2 rows)",
			Examples: []sqlfn.Example{
				{SQL: "SELECT ingest_stddev(x) FROM (SELECT 2 AS x UNION ALL SELECT 4 UNION ALL SELECT 4 UNION ALL SELECT 4 UNION ALL SELECT 5 UNION ALL SELECT 5 UNION ALL SELECT 7 UNION ALL SELECT 9)", Want: "2.138089935299395"},
			},
			NewAgg: func() sqlfn.Agg {
				return &valuesAgg{final: func(x []float64, _ float64) any { _, s := MeanSD(x); return nanNull(s) }}
			},
		},
		{
			Name: "ingest_quantile", NArgs: 2, Deterministic: true, Args: "x, p",
			Doc: "aggregate: the p-quantile (0..1, the same p on every row) of the non-NULL x, Hyndman-Fan type 7 as R's default and numpy.percentile",
			Examples: []sqlfn.Example{
				{SQL: "SELECT ingest_quantile(x, 0.75) FROM (SELECT 1 AS x UNION ALL SELECT 2 UNION ALL SELECT 3 UNION ALL SELECT 4)", Want: "3.25"},
			},
			NewAgg: func() sqlfn.Agg {
				return &valuesAgg{withP: true, final: func(x []float64, p float64) any {
					slices.Sort(x)
					return nanNull(Quantile(x, p))
				}}
			},
		},
		{
			Name: "ingest_tukey_outlier", NArgs: -1, Deterministic: true, Args: "x, q1, q3 [, k]",
			Doc: "1 when x lies outside Tukey's fences q1 - k*(q3-q1) .. q3 + k*(q3-q1) (k defaults to 1.5), else 0; NULL when any argument is NULL",
			Examples: []sqlfn.Example{
				{SQL: "SELECT ingest_tukey_outlier(85, 15, 42.5)", Want: "1"},
				{SQL: "SELECT ingest_tukey_outlier(60, 10, 30)", Want: "0"},
				{SQL: "SELECT ingest_tukey_outlier(85, 15, 42.5, 3)", Want: "0"},
			},
			Scalar: func(args []driver.Value) (driver.Value, error) {
				if len(args) != 3 && len(args) != 4 {
					return nil, fmt.Errorf("takes 3 or 4 arguments (x, q1, q3 [, k]), got %d", len(args))
				}
				for i := range args {
					if sqlfn.IsNull(args, i) {
						return nil, nil
					}
				}
				names := []string{"x", "q1", "q3", "k"}
				v := make([]float64, 4)
				v[3] = 1.5
				for i := range args {
					f, err := sqlfn.Float(args, i, names[i])
					if err != nil {
						return nil, err
					}
					v[i] = f
				}
				if TukeyFences(v[1], v[2], v[3]).Outside(v[0]) {
					return int64(1), nil
				}
				return int64(0), nil
			},
		},
	}
}

func nanNull(f float64) any {
	if math.IsNaN(f) {
		return nil
	}
	return f
}

// valuesAgg collects the non-NULL numeric values of a group (8 bytes each) and computes the
// result from all of them at the end, as the two-pass algorithms and quantiles need.
type valuesAgg struct {
	x     []float64
	withP bool
	p     float64
	haveP bool
	final func(x []float64, p float64) any
}

func (a *valuesAgg) Step(args []driver.Value) error {
	if a.withP {
		if sqlfn.IsNull(args, 1) {
			return fmt.Errorf("argument 2 (p) must not be NULL")
		}
		p, err := sqlfn.Float(args, 1, "p")
		if err != nil {
			return err
		}
		if !(p >= 0 && p <= 1) {
			return fmt.Errorf("argument 2 (p) must be between 0 and 1, got %v", p)
		}
		if a.haveP && p != a.p {
			return fmt.Errorf("argument 2 (p) must be the same on every row, got %v and %v", a.p, p)
		}
		a.p, a.haveP = p, true
	}
	if sqlfn.IsNull(args, 0) {
		return nil
	}
	x, err := sqlfn.Float(args, 0, "x")
	if err != nil {
		return err
	}
	a.x = append(a.x, x)
	return nil
}

func (a *valuesAgg) Value() (driver.Value, error) {
	if len(a.x) == 0 {
		return nil, nil
	}
	return a.final(a.x, a.p), nil
}
