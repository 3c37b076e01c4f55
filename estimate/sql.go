package estimate

import (
	"database/sql/driver"
	"encoding/json"
	"fmt"
	"math"

	"splitsmith/internal/sqlfn"
)

// SQL returns the SQL functions this package declares (see DEVELOPERS.md).
func SQL() sqlfn.Set {
	return sqlfn.Set{Package: "estimate", Funcs: []sqlfn.Func{
		{
			Name: "est_pow3", NArgs: 4, Deterministic: true, Args: "n, a, b, c",
			Doc:      "the inverse power law a + b·n^(−c) at n",
			Examples: []sqlfn.Example{{SQL: "SELECT est_pow3(64, 0.25, 2, 0.5)", Want: "0.5"}},
			Scalar: floats("n", "a", "b", "c", func(x []float64) (driver.Value, error) {
				return Pow3(x[0], x[1], x[2], x[3]), nil
			}),
		},
		{
			Name: "est_nstar_pow3", NArgs: 4, Deterministic: true, Args: "target, a, b, c",
			Doc:      "the n at which a + b·n^(−c) reaches target, (b/(target−a))^(1/c); NULL when target ≤ a (not reachable)",
			Examples: []sqlfn.Example{{SQL: "SELECT est_nstar_pow3(0.5, 0.25, 2, 0.5)", Want: "64"}, {SQL: "SELECT est_nstar_pow3(0.2, 0.25, 2, 0.5)", Want: "NULL"}},
			Scalar: floats("target", "a", "b", "c", func(x []float64) (driver.Value, error) {
				v := NStarPow3(x[0], x[1], x[2], x[3])
				if math.IsInf(v, 1) {
					return nil, nil
				}
				return v, nil
			}),
		},
		{
			Name: "est_predict", NArgs: 3, Deterministic: true, Args: "family, n, params_json",
			Doc:      "a fitted curve family (pow3, pow2, exp3, log2, flat) at n, parameters as in ss_est_fits.params_json",
			Examples: []sqlfn.Example{{SQL: `SELECT est_predict('pow3', 64, '{"a":0.25,"b":2,"c":0.5}')`, Want: "0.5"}},
			Scalar: func(args []driver.Value) (driver.Value, error) {
				if args[0] == nil || args[1] == nil || args[2] == nil {
					return nil, nil
				}
				name, err := sqlfn.Text(args, 0, "family")
				if err != nil {
					return nil, err
				}
				fam, err := FamilyByName(name)
				if err != nil {
					return nil, fmt.Errorf("argument 1 (family): %w", err)
				}
				n, err := sqlfn.Float(args, 1, "n")
				if err != nil {
					return nil, err
				}
				js, err := sqlfn.Text(args, 2, "params_json")
				if err != nil {
					return nil, err
				}
				var m map[string]*float64
				if err := json.Unmarshal([]byte(js), &m); err != nil {
					return nil, fmt.Errorf("argument 3 (params_json): %v", err)
				}
				p := make([]float64, len(fam.Params))
				for i, name := range fam.Params {
					v, ok := m[name]
					if !ok {
						return nil, fmt.Errorf("argument 3 (params_json): no parameter %q for %s", name, fam.Name)
					}
					if v == nil {
						return nil, nil
					}
					p[i] = *v
				}
				return Predict(Fit{Family: fam.Name, Params: p}, n), nil
			},
		},
		{
			Name: "est_riley_binary", NArgs: 4, Deterministic: true, Args: "p, r2cs, prevalence, shrinkage",
			Doc:      "the minimum sample size of Riley et al. (BMJ 2020) for a binary-outcome model: the largest of its three criteria",
			Examples: []sqlfn.Example{{SQL: "SELECT est_riley_binary(24, 0.288, 0.174, 0.9)", Want: "662"}},
			Scalar: floats("p", "r2cs", "prevalence", "shrinkage", func(x []float64) (driver.Value, error) {
				ss, err := RileyBinary(int(x[0]), x[1], x[2], x[3])
				if err != nil {
					return nil, err
				}
				return int64(ss.N), nil
			}),
		},
		{
			Name: "est_riley_continuous", NArgs: 5, Deterministic: true, Args: "p, r2, mean, sd, shrinkage",
			Doc:      "the minimum sample size of Riley et al. (Stat Med 2019, part I) for a continuous-outcome model: the largest of its four criteria",
			Examples: []sqlfn.Example{{SQL: "SELECT est_riley_continuous(10, 0.5, 20, 8, 0.9)", Want: "244"}},
			Scalar: floats5(func(x []float64) (driver.Value, error) {
				ss, err := RileyContinuous(int(x[0]), x[1], x[2], x[3], x[4])
				if err != nil {
					return nil, err
				}
				return int64(ss.N), nil
			}),
		},
		{
			Name: "est_ols_holdout_mse", NArgs: 4, Deterministic: true, Args: "sigma2, p, n, design",
			Doc:      "expected holdout MSE of OLS: σ²(1 + p/n) for design 'fixed', σ²(1 + p/(n−p−1)) for 'random' (NULL when n ≤ p+1)",
			Examples: []sqlfn.Example{{SQL: "SELECT est_ols_holdout_mse(2, 10, 111, 'random')", Want: "2.2"}, {SQL: "SELECT est_ols_holdout_mse(2, 10, 100, 'fixed')", Want: "2.2"}},
			Scalar: func(args []driver.Value) (driver.Value, error) {
				for _, a := range args {
					if a == nil {
						return nil, nil
					}
				}
				s2, err := sqlfn.Float(args, 0, "sigma2")
				if err != nil {
					return nil, err
				}
				p, err := sqlfn.Int(args, 1, "p")
				if err != nil {
					return nil, err
				}
				n, err := sqlfn.Int(args, 2, "n")
				if err != nil {
					return nil, err
				}
				d, err := sqlfn.Text(args, 3, "design")
				if err != nil {
					return nil, err
				}
				v, err := OLSHoldoutMSE(s2, int(p), int(n), d)
				if err != nil {
					return nil, err
				}
				if math.IsInf(v, 1) {
					return nil, nil
				}
				return v, nil
			},
		},
		{
			Name: "est_bca_level", NArgs: 3, Deterministic: true, Args: "z0, a, alpha",
			Doc:      "the BCa-adjusted percentile level Φ(z0 + (z0 + z_α)/(1 − a(z0 + z_α))) (Efron & Tibshirani 1993)",
			Examples: []sqlfn.Example{{SQL: "SELECT round(est_bca_level(0.1, 0.05, 0.025), 5)", Want: "0.05461"}},
			Scalar: floats3(func(x []float64) (driver.Value, error) {
				return BCaLevel(x[0], x[1], x[2]), nil
			}),
		},
		{
			Name: "est_fit_pow3", NArgs: 2, Deterministic: true, Args: "n, err",
			Doc:      "aggregate: the pow3 curve a + b·n^(−c) fitted to (n, err) rows as estimate points fits it, as JSON {a, b, c, se_a, se_b, se_c, rss, aic}; use ORDER BY for bit-exact results",
			Examples: []sqlfn.Example{{SQL: "SELECT round(json_extract(est_fit_pow3(column1, column2), '$.c'), 6) FROM (VALUES (1, 2.25), (4, 1.25), (16, 0.75), (64, 0.5), (256, 0.375))", Want: "0.5"}},
			NewAgg:   func() sqlfn.Agg { return &fitPow3Agg{} },
		},
	}}
}

// floats adapts a 4-argument all-REAL scalar; any NULL argument gives NULL.
func floats(n1, n2, n3, n4 string, fn func([]float64) (driver.Value, error)) func([]driver.Value) (driver.Value, error) {
	names := []string{n1, n2, n3, n4}
	return func(args []driver.Value) (driver.Value, error) { return floatArgs(args, names, fn) }
}

func floats3(fn func([]float64) (driver.Value, error)) func([]driver.Value) (driver.Value, error) {
	names := []string{"z0", "a", "alpha"}
	return func(args []driver.Value) (driver.Value, error) { return floatArgs(args, names, fn) }
}

func floats5(fn func([]float64) (driver.Value, error)) func([]driver.Value) (driver.Value, error) {
	names := []string{"p", "r2", "mean", "sd", "shrinkage"}
	return func(args []driver.Value) (driver.Value, error) { return floatArgs(args, names, fn) }
}

func floatArgs(args []driver.Value, names []string, fn func([]float64) (driver.Value, error)) (driver.Value, error) {
	x := make([]float64, len(args))
	for i := range args {
		if args[i] == nil {
			return nil, nil
		}
		v, err := sqlfn.Float(args, i, names[i])
		if err != nil {
			return nil, err
		}
		x[i] = v
	}
	return fn(x)
}

// fitPow3Agg collects (n, err) rows; rows with a NULL are skipped.
type fitPow3Agg struct{ pts []Point }

func (a *fitPow3Agg) Step(args []driver.Value) error {
	if args[0] == nil || args[1] == nil {
		return nil
	}
	n, err := sqlfn.Float(args, 0, "n")
	if err != nil {
		return err
	}
	e, err := sqlfn.Float(args, 1, "err")
	if err != nil {
		return err
	}
	a.pts = append(a.pts, Point{N: n, Err: e})
	return nil
}

func (a *fitPow3Agg) Value() (driver.Value, error) {
	if len(a.pts) == 0 {
		return nil, nil
	}
	f, err := FitFamily(a.pts, "pow3")
	if err != nil {
		return nil, err
	}
	return Pow3FitJSON(f), nil
}

// Pow3FitJSON renders a pow3 fit as est_fit_pow3 returns it.
func Pow3FitJSON(f Fit) string {
	m := map[string]any{
		"a": dbFloat(f.Params[0]), "b": dbFloat(f.Params[1]), "c": dbFloat(f.Params[2]),
		"se_a": dbFloat(f.StdErr[0]), "se_b": dbFloat(f.StdErr[1]), "se_c": dbFloat(f.StdErr[2]),
		"rss": dbFloat(f.RSS), "aic": dbFloat(f.AIC),
	}
	b, _ := json.Marshal(m)
	return string(b)
}
