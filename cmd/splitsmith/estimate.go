package main

import (
	"context"
	"encoding/csv"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"

	"github.com/urfave/cli/v2"

	"splitsmith/estimate"
	"splitsmith/internal/store"
)

const (
	pointsHint  = "splitsmith estimate points --points points.csv --target 0.1"
	formulaHint = "splitsmith estimate formula --outcome binary --params 24 --r2cs 0.288 --prevalence 0.174"
)

func newEstimateCommand(s stdio) *cli.Command {
	return &cli.Command{
		Name:  "estimate",
		Usage: "learning curves, their extrapolation, and closed-form sample-size criteria",
		Description: `How much more data must we collect, and with which model capacity?

   estimate curve    measures learning curves on a split at several model capacities
   estimate points   fits and extrapolates (n, error) points measured elsewhere
   estimate formula  published closed-form sample-size criteria (Riley et al.)

Every answer is a planning estimate from an extrapolation, not a guarantee.`,
		Subcommands: []*cli.Command{newEstimatePointsCommand(s), newEstimateFormulaCommand(s), newEstimateCurveCommand(s)},
	}
}

// ---- estimate points -------------------------------------------------------------------

type pointsOptions struct {
	points, db, plot, format string
	families                 []string
	target, at, level        float64
	bootstrap, holdout       int
	seed                     uint64
}

func newEstimatePointsCommand(s stdio) *cli.Command {
	return &cli.Command{
		Name:  "points",
		Usage: "fit learning-curve families to (n, error) points and extrapolate with confidence intervals",
		Description: `Reads a CSV file of measured points with a header naming the columns
   n            training size (a positive number)
   error        holdout error at that size (a non-negative number, lower is better)
   repeat       optional: which repeat (seeded subset) the measurement comes from
   train_error  optional: training error of the same fit (enables the overfitting diagnosis)

Fits the curve families pow3 a + b·n^(−c), pow2 b·n^(−c), exp3 a + b·e^(−c·n),
log2 a + b·ln n and flat a by weighted Levenberg–Marquardt (weights from the spread across
repeats), chooses the family that best predicts the largest sizes when refitted on the
smaller ones (the backtest; flat wins when it is within the noise of the best), and
bootstraps it (over repeats, or residuals without repeats) for BCa intervals of the
asymptote, of n* (the n that reaches --target) and of the error at --at. A target at or
below the asymptote (or a flat curve's level) is reported as not reachable with this
capacity; an asymptote the data do not pin down is reported as not identified, and an n*
beyond 1000× the largest size as not a meaningful extrapolation.

With --db the points, fits and estimate are also stored (ss_est_points, ss_est_fits,
ss_est_estimates), with an audit query that recomputes the pow3 fit with est_fit_pow3.

These are planning estimates from an extrapolation, not guarantees.

Examples:
   splitsmith estimate points --points wall_loss_curve.csv --target 0.12 --at 20000
   splitsmith estimate points --points wall_loss_curve.csv --format json --db pipes.db`,
		Flags: []cli.Flag{
			&cli.StringFlag{Name: "points", Usage: "CSV `FILE` with columns n, error[, repeat][, train_error] (required)"},
			&cli.Float64Flag{Name: "target", Usage: "target error `T`: report n*, the size that reaches it"},
			&cli.Float64Flag{Name: "at", Usage: "planned training size `N`: report the error expected there"},
			&cli.StringFlag{Name: "families", Value: "pow3,pow2,exp3,log2,flat", Usage: "curve `FAMILIES` to try"},
			&cli.IntFlag{Name: "bootstrap", Value: 1000, Usage: "bootstrap refits `B`"},
			&cli.Float64Flag{Name: "level", Value: 0.95, Usage: "confidence `LEVEL` of the intervals"},
			&cli.IntFlag{Name: "holdout", Usage: "largest sizes held out by the backtest `K` (default: a quarter, at least 1)"},
			&cli.StringFlag{Name: "plot", Usage: "write a plot to `FILE` (.svg or .png)"},
			&cli.StringFlag{Name: "db", Usage: "also store the results in this splitsmith database `FILE` (created if missing)"},
			seedFlag(),
			formatFlag("table", "table", "json"),
		},
		Action: func(cc *cli.Context) error {
			if cc.NArg() > 0 {
				return usagef(pointsHint, "unexpected argument %q", cc.Args().First())
			}
			o := pointsOptions{points: cc.String("points"), db: cc.String("db"), plot: cc.String("plot"),
				target: cc.Float64("target"), at: cc.Float64("at"), level: cc.Float64("level"),
				bootstrap: cc.Int("bootstrap"), holdout: cc.Int("holdout"), seed: cc.Uint64("seed")}
			if o.points == "" {
				return usagef(pointsHint, "--points is required")
			}
			var err error
			if o.format, err = checkChoice(cc, "format", "table", "json"); err != nil {
				return err
			}
			for _, f := range strings.Split(cc.String("families"), ",") {
				f = strings.TrimSpace(f)
				if _, err := estimate.FamilyByName(f); err != nil {
					return usagef(pointsHint, "--families: %v", err)
				}
				o.families = append(o.families, f)
			}
			if cc.IsSet("target") && !(o.target > 0) {
				return usagef(pointsHint, "--target: %v must be a positive error", o.target)
			}
			if cc.IsSet("at") && !(o.at > 0) {
				return usagef(pointsHint, "--at: %v must be a positive size", o.at)
			}
			if o.bootstrap < 1 {
				return usagef(pointsHint, "--bootstrap: %d must be at least 1", o.bootstrap)
			}
			if !(o.level > 0 && o.level < 1) {
				return usagef(pointsHint, "--level: %v must lie in (0, 1)", o.level)
			}
			if o.holdout < 0 {
				return usagef(pointsHint, "--holdout: %d must be positive", o.holdout)
			}
			if o.plot != "" {
				if ext := strings.ToLower(filepath.Ext(o.plot)); ext != ".svg" && ext != ".png" {
					return usagef(pointsHint, "--plot: %q must end in .svg or .png", o.plot)
				}
			}
			return runEstimatePoints(cc.Context, cc, o, s)
		},
	}
}

// readPoints reads a points file; every problem is located as file:line, column, value.
func readPoints(path string) (holdout, train []estimate.PointRow, err error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, nil, err
	}
	defer f.Close()
	r := csv.NewReader(f)
	r.FieldsPerRecord = -1
	r.TrimLeadingSpace = true
	header, err := r.Read()
	if err == io.EOF {
		return nil, nil, fmt.Errorf("%s: empty file (want a header: n, error[, repeat][, train_error])", path)
	}
	if err != nil {
		return nil, nil, fmt.Errorf("%s: %w", path, err)
	}
	col := map[string]int{}
	for i, h := range header {
		h = strings.ToLower(strings.TrimSpace(strings.TrimPrefix(h, "\ufeff")))
		switch h {
		case "n", "error", "repeat", "train_error":
		default:
			return nil, nil, fmt.Errorf("%s:1: unknown column %q (the columns are n, error, repeat, train_error)", path, header[i])
		}
		if _, dup := col[h]; dup {
			return nil, nil, fmt.Errorf("%s:1: column %q appears twice", path, h)
		}
		col[h] = i
	}
	for _, need := range []string{"n", "error"} {
		if _, ok := col[need]; !ok {
			return nil, nil, fmt.Errorf("%s:1: missing column %q (the header must name n and error)", path, need)
		}
	}
	for {
		rec, err := r.Read()
		if err == io.EOF {
			break
		}
		line, _ := r.FieldPos(0)
		if err != nil {
			return nil, nil, fmt.Errorf("%s: %w", path, err)
		}
		if len(rec) == 1 && strings.TrimSpace(rec[0]) == "" {
			continue
		}
		if len(rec) != len(header) {
			return nil, nil, fmt.Errorf("%s:%d: %d fields, the header has %d", path, line, len(rec), len(header))
		}
		get := func(name string) (float64, bool, error) {
			i, ok := col[name]
			if !ok {
				return 0, false, nil
			}
			v := strings.TrimSpace(rec[i])
			if v == "" {
				return 0, false, nil
			}
			x, err := strconv.ParseFloat(v, 64)
			if err != nil || math.IsNaN(x) || math.IsInf(x, 0) {
				return 0, false, fmt.Errorf("%s:%d: column %q: cannot parse %q as a number", path, line, name, rec[i])
			}
			return x, true, nil
		}
		n, okN, err := get("n")
		if err != nil {
			return nil, nil, err
		}
		if !okN {
			return nil, nil, fmt.Errorf("%s:%d: column \"n\": missing value", path, line)
		}
		if n <= 0 {
			return nil, nil, fmt.Errorf("%s:%d: column \"n\": %s is not a positive size", path, line, rec[col["n"]])
		}
		e, okE, err := get("error")
		if err != nil {
			return nil, nil, err
		}
		if !okE {
			return nil, nil, fmt.Errorf("%s:%d: column \"error\": missing value", path, line)
		}
		if e < 0 {
			return nil, nil, fmt.Errorf("%s:%d: column \"error\": %s is negative (errors are losses: lower is better, 0 at best)", path, line, rec[col["error"]])
		}
		rep, okR, err := get("repeat")
		if err != nil {
			return nil, nil, err
		}
		if okR && rep != math.Trunc(rep) {
			return nil, nil, fmt.Errorf("%s:%d: column \"repeat\": %s is not an integer", path, line, rec[col["repeat"]])
		}
		holdout = append(holdout, estimate.PointRow{Point: estimate.Point{N: n, Err: e, Repeat: int(rep)}, Kind: "holdout", Line: line})
		te, okT, err := get("train_error")
		if err != nil {
			return nil, nil, err
		}
		if okT {
			if te < 0 {
				return nil, nil, fmt.Errorf("%s:%d: column \"train_error\": %s is negative", path, line, rec[col["train_error"]])
			}
			train = append(train, estimate.PointRow{Point: estimate.Point{N: n, Err: te, Repeat: int(rep)}, Kind: "train", Line: line})
		}
	}
	if len(holdout) == 0 {
		return nil, nil, fmt.Errorf("%s: no points after the header", path)
	}
	return holdout, train, nil
}

func runEstimatePoints(ctx context.Context, cc *cli.Context, o pointsOptions, s stdio) error {
	hold, train, err := readPoints(o.points)
	if err != nil {
		if errors.Is(err, os.ErrNotExist) {
			return err
		}
		return asUsage(err, pointsHint)
	}
	pts := make([]estimate.Point, len(hold))
	for i, p := range hold {
		pts[i] = p.Point
	}
	opts := &estimate.Options{Families: o.families, Target: o.target, At: o.at, Bootstrap: o.bootstrap,
		Level: o.level, Seed: o.seed, Holdout: o.holdout}
	for _, p := range train {
		opts.Train = append(opts.Train, p.Point)
	}
	prog := newProgress(s.err, "bootstrap")
	opts.Progress = prog.Report
	res, err := estimate.Extrapolate(pts, opts)
	prog.Done()
	if err != nil {
		return asUsage(fmt.Errorf("%s: %w", o.points, err), pointsHint)
	}
	opts.Progress = nil
	subject := "points:" + o.points
	if o.db != "" {
		err := update(ctx, cc, o.db, true, func(ctx context.Context, tx *store.Tx) error {
			in, err := store.HashFile(o.points)
			if err != nil {
				return err
			}
			tx.AddInput(in)
			tx.SetDetail("subject", subject)
			tx.SetDetail("options", map[string]any{"families": o.families, "target": o.target, "at": o.at,
				"bootstrap": o.bootstrap, "level": o.level, "seed": o.seed, "holdout": o.holdout})
			if err := estimate.SavePoints(ctx, tx.Conn, tx.RunID, subject, append(hold, train...)); err != nil {
				return err
			}
			if err := estimate.SaveResult(ctx, tx.Conn, tx.RunID, subject, res, opts, len(pts)); err != nil {
				return err
			}
			for _, f := range res.Fits {
				if f.Family != "pow3" {
					continue
				}
				q := fmt.Sprintf(`WITH r AS (SELECT est_fit_pow3(n, err ORDER BY line) AS j FROM ss_est_points WHERE run_id = %d AND subject = %s AND kind = 'holdout') `+
					`SELECT f.params_json, r.j FROM ss_est_fits f, r WHERE f.run_id = %d AND f.subject = %s AND f.family = 'pow3' `+
					`AND (json_extract(f.params_json, '$.a') IS NOT json_extract(r.j, '$.a') OR json_extract(f.params_json, '$.b') IS NOT json_extract(r.j, '$.b') OR json_extract(f.params_json, '$.c') IS NOT json_extract(r.j, '$.c'))`,
					tx.RunID, store.QuoteString(subject), tx.RunID, store.QuoteString(subject))
				if err := tx.AddAuditQuery(ctx, subject, "pow3_fit", "check",
					"the stored pow3 fit, recomputed from the stored points with est_fit_pow3; empty when they agree", q, true); err != nil {
					return err
				}
			}
			return nil
		})
		if err != nil {
			return err
		}
	}
	if o.plot != "" {
		var tr []estimate.Point
		for _, p := range train {
			tr = append(tr, p.Point)
		}
		pl, err := estimate.PlotPoints(pts, tr, res, o.target, o.at, "learning curve: "+filepath.Base(o.points))
		if err == nil {
			err = estimate.SavePlot(pl, o.plot)
		}
		if err != nil {
			return fmt.Errorf("plot %s: %w", o.plot, err)
		}
	}
	if o.format == "json" {
		return writeJSON(s.out, pointsJSON(subject, len(pts), res, opts))
	}
	return printPoints(s.out, len(pts), res, opts)
}

func ptsJF(v float64) any {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return nil
	}
	return v
}

func fitJSON(f estimate.Fit) map[string]any {
	fam, _ := estimate.FamilyByName(f.Family)
	params, se := map[string]any{}, map[string]any{}
	for i, name := range fam.Params {
		params[name] = ptsJF(f.Params[i])
		se[name] = ptsJF(f.StdErr[i])
	}
	return map[string]any{"family": f.Family, "params": params, "stderr": se, "rss": ptsJF(f.RSS), "aic": ptsJF(f.AIC), "backtest_err": ptsJF(f.BacktestErr)}
}

func pointsJSON(subject string, npts int, res *estimate.Result, o *estimate.Options) map[string]any {
	var fits []map[string]any
	for _, f := range res.Fits {
		fits = append(fits, fitJSON(f))
	}
	out := map[string]any{
		"subject": subject, "points": npts, "sizes": res.Sizes, "mean_error": res.MeanErr,
		"fits": fits, "best": res.Best.Family, "asymptote": res.Asymptote, "level": res.Level,
		"bootstrap": res.Bootstrap, "seed": o.Seed, "verdict": res.Verdict, "caution": res.Caution,
		"flat": res.Flat, "asymptote_identified": res.Asymptote.Method != "none" && !res.AsymptoteUnidentified,
		"asymptote_lo_at_bound": res.AsymptoteLoAtBound, "horizon_n": res.HorizonN,
	}
	if res.NStar != nil {
		out["target"] = o.Target
		out["nstar"] = res.NStar
		out["reachable"] = res.Reachable
		out["nstar_beyond_horizon"] = res.NStarBeyondHorizon
	}
	if res.Band != nil {
		out["band"] = res.Band
	}
	if res.AtErr != nil {
		out["at"] = o.At
		out["at_error"] = res.AtErr
	}
	if g := res.Gap; g != nil {
		out["gap"] = map[string]any{"train_holdout_ratio": ptsJF(g.Ratio), "gap": ptsJF(g.Gap), "exponent": ptsJF(g.Exponent), "variance_limited": g.VarianceLimited, "by_size": gapBySizeJSON(g)}
	}
	return out
}

// gapBySizeJSON is the train–holdout gap at every size, for JSON output.
func gapBySizeJSON(g *estimate.GapDiagnosis) []map[string]any {
	out := []map[string]any{}
	for _, s := range g.BySize {
		out = append(out, map[string]any{"n": s.N, "train": ptsJF(s.Train), "holdout": ptsJF(s.Holdout), "ratio": ptsJF(s.Ratio), "variance_limited": s.VarianceLimited})
	}
	return out
}

// asymptoteCells prints the asymptote's value and interval: "not identified" instead of a
// number the data do not support, and "0 (bound)" for a lower end that is the constraint.
func asymptoteCells(res *estimate.Result) (value, lo, hi string) {
	value = ptsG4(res.Asymptote.Est)
	if res.AsymptoteUnidentified {
		value = "not identified"
	}
	return value, estimate.AsymptoteLoString(res), ptsG4(res.Asymptote.Hi)
}

// nstarCells prints n* and its interval, "beyond 1000× the data" past the horizon.
func nstarCells(res *estimate.Result) (value, lo, hi string) {
	value = estimate.NStarString(res, res.NStar.Est)
	if res.NStarBeyondHorizon {
		value = fmt.Sprintf("beyond %g× the data (not a meaningful extrapolation)", float64(estimate.Horizon))
	}
	return value, estimate.NStarString(res, res.NStar.Lo), estimate.NStarString(res, res.NStar.Hi)
}

func ptsG4(v float64) string {
	switch {
	case math.IsInf(v, 1):
		return "unbounded"
	case math.IsNaN(v):
		return "-"
	}
	return strconv.FormatFloat(v, 'g', 4, 64)
}

func printPoints(w io.Writer, npts int, res *estimate.Result, o *estimate.Options) error {
	how := "weighted least squares (weights from the spread across repeats)"
	for _, r := range res.Repeats {
		if r < 2 {
			how = "least squares, unweighted (a single measurement at some sizes)"
		}
	}
	fmt.Fprintf(w, "%d points at %d sizes (%g to %g); %s per family:\n\n", npts, len(res.Sizes), res.Sizes[0], res.Sizes[len(res.Sizes)-1], how)
	t := &table{Header: []string{"family", "parameters (± s.e.)", "aic", "backtest", "chosen"}}
	for _, f := range res.Fits {
		fam, _ := estimate.FamilyByName(f.Family)
		var ps []string
		for i, name := range fam.Params {
			ps = append(ps, fmt.Sprintf("%s=%s±%s", name, ptsG4(f.Params[i]), ptsG4(f.StdErr[i])))
		}
		bt := "-"
		if !math.IsNaN(f.BacktestErr) {
			bt = fmt.Sprintf("%.1f%%", 100*f.BacktestErr)
		}
		chosen := ""
		if f.Family == res.Best.Family {
			chosen = "*"
		}
		aic := "-"
		if !math.IsNaN(f.AIC) {
			aic = fmt.Sprintf("%.2f", f.AIC)
		}
		t.add(f.Family, strings.Join(ps, " "), aic, bt, chosen)
	}
	if err := t.write(w, "table"); err != nil {
		return err
	}
	fmt.Fprintln(w)
	lvl := fmt.Sprintf("%g%% interval", 100*res.Level)
	e := &table{Header: []string{"estimate", "value", lvl, "method"}}
	if res.Asymptote.Method != "none" {
		v, lo, hi := asymptoteCells(res)
		name := "asymptote"
		if res.Flat {
			name = "level (flat curve)"
		}
		e.add(name, v, lo+" to "+hi, res.Asymptote.Method)
	}
	if res.NStar != nil {
		v, lo, hi := nstarCells(res)
		ivs := lo + " to " + hi
		if sum := estimate.NStarSummary(res, o.Target); strings.HasPrefix(sum, "not ") {
			v, ivs = sum, "-"
		}
		e.add(fmt.Sprintf("n* for error %g", o.Target), v, ivs, res.NStar.Method)
	}
	if res.AtErr != nil {
		e.add(fmt.Sprintf("error at n=%g", o.At), ptsG4(res.AtErr.Est), ptsG4(res.AtErr.Lo)+" to "+ptsG4(res.AtErr.Hi), res.AtErr.Method)
	}
	if g := res.Gap; g != nil {
		e.add("train/holdout error", ptsG4(g.Ratio), "-", "at the largest size")
		var vl []string
		for _, s := range g.BySize {
			if s.VarianceLimited {
				vl = append(vl, fmt.Sprintf("%g (%s)", s.N, ptsG4(s.Ratio)))
			}
		}
		switch {
		case len(vl) > 1 && len(vl) == len(g.BySize):
			e.add("variance-limited at n", "every size", "-", "train/holdout < 0.5")
		case len(vl) > 0:
			e.add("variance-limited at n", strings.Join(vl, ", "), "-", "train/holdout < 0.5")
		}
	}
	if len(e.Rows) > 0 {
		if err := e.write(w, "table"); err != nil {
			return err
		}
		fmt.Fprintln(w)
	}
	fmt.Fprintf(w, "%s\n", res.Verdict)
	return nil
}

// ---- estimate formula ------------------------------------------------------------------

type formulaOptions struct {
	outcome, format, db            string
	params                         int
	r2cs, prevalence, r2, mean, sd float64
	shrinkage                      float64
}

func newEstimateFormulaCommand(s stdio) *cli.Command {
	return &cli.Command{
		Name:  "formula",
		Usage: "closed-form sample-size criteria for prediction models (Riley et al.)",
		Description: `Minimum sample size for developing a prediction model with P candidate parameters,
by the criteria of Riley et al. (BMJ 2020;368:m441; Statistics in Medicine 2019;38:1262–1296):

   binary outcome (--r2cs R --prevalence F):
      shrinkage     expected uniform shrinkage ≥ S (default 0.9)
      optimism      apparent − adjusted Nagelkerke R² ≤ 0.05
      overall_risk  overall outcome proportion estimated within ± 0.05
   continuous outcome (--r2 R --mean M --sd S):
      shrinkage     expected uniform shrinkage ≥ S
      optimism      apparent − adjusted R² ≤ 0.05
      residual_sd   residual SD within a multiplicative margin of error 1.1
      intercept     mean outcome within a multiplicative margin of error 1.1

Reports each criterion's n, which one binds (the largest), and events per parameter. For a
continuous outcome it also gives ordinary least squares' expected holdout error at that n,
σ²(1 + p/(n − p − 1)) for Gaussian random inputs (Hastie, Tibshirani & Friedman).

These are planning estimates, not guarantees; clinical models need qualified statistical
review. With --db the criteria are stored in ss_est_criteria.

Examples:
   splitsmith estimate formula --outcome binary --params 24 --r2cs 0.288 --prevalence 0.174
   splitsmith estimate formula --outcome continuous --params 10 --r2 0.5 --mean 20 --sd 8`,
		Flags: []cli.Flag{
			&cli.StringFlag{Name: "outcome", Usage: "`KIND` of outcome: binary or continuous (required)"},
			&cli.IntFlag{Name: "params", Usage: "candidate predictor parameters `P` (required)"},
			&cli.Float64Flag{Name: "r2cs", Usage: "binary: anticipated Cox–Snell `R2`"},
			&cli.Float64Flag{Name: "prevalence", Usage: "binary: outcome proportion `F`"},
			&cli.Float64Flag{Name: "r2", Usage: "continuous: anticipated (adjusted) `R2`"},
			&cli.Float64Flag{Name: "mean", Usage: "continuous: mean outcome `M` in the target population"},
			&cli.Float64Flag{Name: "sd", Usage: "continuous: outcome standard deviation `S`"},
			&cli.Float64Flag{Name: "shrinkage", Value: estimate.DefaultShrinkage, Usage: "target expected shrinkage `S`"},
			&cli.StringFlag{Name: "db", Usage: "also store the results in this splitsmith database `FILE` (created if missing)"},
			formatFlag("table", "table", "json"),
		},
		Action: func(cc *cli.Context) error {
			if cc.NArg() > 0 {
				return usagef(formulaHint, "unexpected argument %q", cc.Args().First())
			}
			o := formulaOptions{db: cc.String("db"), params: cc.Int("params"), r2cs: cc.Float64("r2cs"), prevalence: cc.Float64("prevalence"),
				r2: cc.Float64("r2"), mean: cc.Float64("mean"), sd: cc.Float64("sd"), shrinkage: cc.Float64("shrinkage")}
			var err error
			if o.format, err = checkChoice(cc, "format", "table", "json"); err != nil {
				return err
			}
			if !cc.IsSet("outcome") {
				return usagef(formulaHint, "--outcome is required (binary or continuous)")
			}
			if o.outcome, err = checkChoice(cc, "outcome", "binary", "continuous"); err != nil {
				return err
			}
			if !cc.IsSet("params") {
				return usagef(formulaHint, "--params is required")
			}
			need, forbid := []string{"r2cs", "prevalence"}, []string{"r2", "mean", "sd"}
			if o.outcome == "continuous" {
				need, forbid = forbid, need
			}
			for _, f := range need {
				if !cc.IsSet(f) {
					return usagef(formulaHint, "--outcome %s needs --%s", o.outcome, f)
				}
			}
			for _, f := range forbid {
				if cc.IsSet(f) {
					return usagef(formulaHint, "--%s does not apply to --outcome %s", f, o.outcome)
				}
			}
			return runEstimateFormula(cc.Context, cc, o, s)
		},
	}
}

func runEstimateFormula(ctx context.Context, cc *cli.Context, o formulaOptions, s stdio) error {
	var ss *estimate.SampleSize
	var err error
	inputs := map[string]any{"params": o.params, "shrinkage": o.shrinkage}
	if o.outcome == "binary" {
		ss, err = estimate.RileyBinary(o.params, o.r2cs, o.prevalence, o.shrinkage)
		inputs["r2cs"], inputs["prevalence"] = o.r2cs, o.prevalence
	} else {
		ss, err = estimate.RileyContinuous(o.params, o.r2, o.mean, o.sd, o.shrinkage)
		inputs["r2"], inputs["mean"], inputs["sd"] = o.r2, o.mean, o.sd
	}
	if err != nil {
		return asUsage(err, formulaHint)
	}
	var olsRatio float64
	if o.outcome == "continuous" {
		olsRatio, _ = estimate.OLSHoldoutMSE(1, o.params, ss.N, "random")
	}
	if o.db != "" {
		err := update(ctx, cc, o.db, true, func(ctx context.Context, tx *store.Tx) error {
			tx.SetDetail("outcome", o.outcome)
			tx.SetDetail("inputs", inputs)
			return estimate.SaveSampleSize(ctx, tx.Conn, tx.RunID, ss, inputs)
		})
		if err != nil {
			return err
		}
	}
	if o.format == "json" {
		var crit []map[string]any
		for _, c := range ss.Criteria {
			crit = append(crit, map[string]any{"criterion": c.Name, "n": c.N, "value": c.Value, "binds": c.Binds, "meaning": c.Doc})
		}
		out := map[string]any{"outcome": ss.Outcome, "inputs": inputs, "criteria": crit, "n": ss.N, "binding": ss.Binding, "caution": ss.Caution}
		if o.outcome == "binary" {
			out["events"] = ss.Events
			out["events_per_parameter"] = ss.EPP
		} else {
			out["n_per_parameter"] = ss.EPP
			out["ols_holdout_mse_over_sigma2"] = olsRatio
		}
		return writeJSON(s.out, out)
	}
	t := &table{Header: []string{"criterion", "n", "binds", "meaning"}}
	for _, c := range ss.Criteria {
		b := ""
		if c.Binds {
			b = "*"
		}
		t.add(c.Name, c.N, b, c.Doc)
	}
	if err := t.write(s.out, "table"); err != nil {
		return err
	}
	fmt.Fprintln(s.out)
	if o.outcome == "binary" {
		fmt.Fprintf(s.out, "Minimum sample size %d (the %s criterion binds): %.0f expected events, %.1f events per candidate parameter.\n", ss.N, ss.Binding, ss.Events, ss.EPP)
	} else {
		fmt.Fprintf(s.out, "Minimum sample size %d (the %s criterion binds): %.1f observations per candidate parameter.\n", ss.N, ss.Binding, ss.EPP)
		fmt.Fprintf(s.out, "Ordinary least squares' expected holdout error at n = %d is %.4g σ² (Gaussian random design, σ²(1 + p/(n − p − 1))).\n", ss.N, olsRatio)
	}
	fmt.Fprintf(s.out, "Caution: %s\n", ss.Caution)
	return nil
}
