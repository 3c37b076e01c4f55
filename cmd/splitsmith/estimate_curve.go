package main

import (
	"context"
	"encoding/json"
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

const curveHint = "splitsmith estimate curve --db pipes.db --split sound --label wall_loss_pct --features install_year,pressure_kpa --model ridge --capacity 1,2,3"

type curveOptions struct {
	db        string
	spec      estimate.LoadSpec
	curve     estimate.CurveOptions
	extra     estimate.Options // Target, At, Bootstrap, Level, Seed
	plot      string
	format    string
	sizesAuto bool
}

func newEstimateCurveCommand(s stdio) *cli.Command {
	return &cli.Command{
		Name:  "curve",
		Usage: "measure learning curves on a split at several model capacities, fit and extrapolate them",
		Description: `Trains a built-in model at each capacity on nested random subsets of the split's
training side (about 8 sizes, geometric from a small n to the whole side, unless --sizes),
--repeats times with different seeded subsets, and scores it on the subset (training error)
and on the holdout side (holdout error). Each capacity's holdout curve is then fitted and
extrapolated (curve families pow3, pow2, exp3, log2, chosen by a backtest; bootstrap
intervals): its asymptote, the n* at which it reaches --target, the error expected at --at.
The report says which capacity reaches the target soonest, which capacity is best at each
size (the crossover), when a target is below a capacity's asymptote (underfitting: more data
will not get there, more capacity might), and when training error is far below holdout
error (variance-limited: overfitting, and how the gap shrinks with n).

MODELS (capacity knob)
   ridge      polynomial ridge regression; capacity = total degree over the features,
              interactions included (features standardised before expanding)
   logistic   logistic regression on polynomial features, 0/1 label; capacity = degree
   knn        k-nearest neighbours (regression, or 0/1 label with a classification metric);
              --capacity lists k (capacity 1/k: smaller k, more flexible)

METRICS   regression: mse (default), rmse, mae; classification: error (default for
          logistic), logloss, auc (stored and fitted as 1 − AUC, so every curve falls)

FEATURES  INTEGER, REAL, BOOLEAN columns as numbers (a missing value is the training mean,
          plus a <col>:missing indicator); TEXT columns one-hot encoded with the training
          side's levels (reference: the most frequent; missing is a level of its own; unseen
          holdout levels count as the reference). Rows without a label are skipped.

Results go to ss_est_curve_runs, ss_est_curve_points and ss_est_curve_fits. Every estimate
is an extrapolation, not a guarantee; clinical or safety models need qualified statistical
review.

Examples:
   splitsmith estimate curve --db pipes.db --split sound --label wall_loss_pct \
       --features install_year,pressure_kpa,soil_moisture --model ridge --capacity 1,2,3,4 \
       --metric rmse --target 2.4 --plot wall_loss.svg
   splitsmith estimate curve --db pipes.db --split sound --label repaired_365d \
       --features wall_loss_pct,prior_breaks --model logistic --capacity 1,2 --metric logloss`,
		Flags: []cli.Flag{
			dbFlag(),
			&cli.StringFlag{Name: "split", Usage: "split `NAME` (required)"},
			&cli.StringFlag{Name: "label", Usage: "label `COL` (required): numeric; 0/1 for classification metrics"},
			&cli.StringFlag{Name: "features", Usage: "feature columns `COL,...` (required)"},
			&cli.StringFlag{Name: "model", Value: "ridge", Usage: "`MODEL`: ridge, logistic or knn"},
			&cli.StringFlag{Name: "capacity", Usage: "capacities `LIST` (required): degrees, or k for knn"},
			&cli.StringFlag{Name: "sizes", Value: "auto", Usage: "training sizes `LIST` (increasing), or auto"},
			&cli.IntFlag{Name: "repeats", Value: 5, Usage: "seeded subsets per size `R`"},
			&cli.StringFlag{Name: "metric", Usage: "`METRIC`: mse, rmse, mae, error, logloss, auc (default mse; error for logistic)"},
			&cli.Float64Flag{Name: "target", Usage: "target error `T` (in the metric's units): report n*, the size that reaches it"},
			&cli.Float64Flag{Name: "at", Usage: "planned training size `N`: report the error expected there"},
			&cli.IntFlag{Name: "bootstrap", Value: 1000, Usage: "bootstrap refits `B` per capacity for the intervals"},
			&cli.Float64Flag{Name: "level", Value: 0.95, Usage: "confidence `LEVEL` of the intervals"},
			&cli.Float64Flag{Name: "ridge", Value: estimate.DefaultRidge, Usage: "ridge penalty `λ` per training row on the standardised coefficients (0 = none)"},
			&cli.Float64Flag{Name: "l2", Value: estimate.DefaultL2, Usage: "logistic L2 penalty `λ` (scikit-learn's 1/C; 0 = none)"},
			&cli.StringFlag{Name: "train-side", Usage: "train on this `SIDE` (default: the sides whose role is train)"},
			&cli.StringFlag{Name: "holdout-side", Usage: "evaluate on this `SIDE` (default: the sides whose role is holdout)"},
			seedFlag(),
			&cli.StringFlag{Name: "plot", Usage: "write the curves to `FILE` (.svg or .png)"},
			formatFlag("table", "table", "json"),
		},
		Action: func(cc *cli.Context) error {
			o, err := curveFlags(cc)
			if err != nil {
				return err
			}
			return runEstimateCurve(cc.Context, cc, o, s)
		},
	}
}

func splitList(flag, v string) ([]string, error) {
	var out []string
	for _, f := range strings.Split(v, ",") {
		f = strings.TrimSpace(f)
		if f == "" {
			return nil, usagef(curveHint, "--%s: %q has an empty item", flag, v)
		}
		out = append(out, f)
	}
	return out, nil
}

func curveFlags(cc *cli.Context) (curveOptions, error) {
	if cc.NArg() > 0 {
		return curveOptions{}, usagef(curveHint, "unexpected argument %q", cc.Args().First())
	}
	o := curveOptions{db: cc.String("db"), plot: cc.String("plot")}
	for _, req := range []string{"split", "label", "features", "capacity"} {
		if cc.String(req) == "" {
			return o, usagef(curveHint, "--%s is required", req)
		}
	}
	o.spec = estimate.LoadSpec{Split: cc.String("split"), Label: cc.String("label"),
		TrainSide: cc.String("train-side"), HoldoutSide: cc.String("holdout-side")}
	var err error
	if o.spec.Features, err = splitList("features", cc.String("features")); err != nil {
		return o, err
	}
	if o.format, err = checkChoice(cc, "format", "table", "json"); err != nil {
		return o, err
	}
	model, err := checkChoice(cc, "model", estimate.Models...)
	if err != nil {
		return o, err
	}
	o.curve = estimate.CurveOptions{Model: model, Repeats: cc.Int("repeats"), Seed: cc.Uint64("seed")}
	for _, f := range []string{"ridge", "l2"} {
		v := cc.Float64(f)
		if !(v >= 0) || math.IsInf(v, 0) {
			return o, usagef(curveHint, "--%s: %g, must be a finite number ≥ 0", f, v)
		}
		if v == 0 {
			v = -1 // none (zero means the default in CurveOptions)
		}
		if f == "ridge" {
			o.curve.Ridge = v
		} else {
			o.curve.L2 = v
		}
	}
	if m := cc.String("metric"); m != "" {
		if o.curve.Metric, err = checkChoice(cc, "metric", estimate.Metrics...); err != nil {
			return o, err
		}
	}
	caps, err := splitList("capacity", cc.String("capacity"))
	if err != nil {
		return o, err
	}
	for _, c := range caps {
		v, err := strconv.ParseFloat(c, 64)
		if err != nil {
			return o, usagef(curveHint, "--capacity: %q is not a number", c)
		}
		o.curve.Capacities = append(o.curve.Capacities, v)
	}
	if sz := cc.String("sizes"); sz != "auto" {
		items, err := splitList("sizes", sz)
		if err != nil {
			return o, err
		}
		for _, it := range items {
			v, err := strconv.Atoi(it)
			if err != nil {
				return o, usagef(curveHint, "--sizes: %q is not a whole number", it)
			}
			o.curve.Sizes = append(o.curve.Sizes, v)
		}
		if len(o.curve.Sizes) < estimate.MinSizes {
			return o, usagef(curveHint, "--sizes: %d sizes given, a curve needs at least %d", len(o.curve.Sizes), estimate.MinSizes)
		}
	} else {
		o.sizesAuto = true
	}
	if o.curve.Repeats < 1 {
		return o, usagef(curveHint, "--repeats: %d, must be at least 1", o.curve.Repeats)
	}
	t := cc.Float64("target")
	if cc.IsSet("target") && !(t > 0) {
		return o, usagef(curveHint, "--target: %g, must lie in (0, the largest measured error)", t)
	}
	at := cc.Float64("at")
	if cc.IsSet("at") && !(at >= 1) {
		return o, usagef(curveHint, "--at: %g, must be a training size of at least 1", at)
	}
	b := cc.Int("bootstrap")
	if b < 1 {
		return o, usagef(curveHint, "--bootstrap: %d, must be at least 1", b)
	}
	lv := cc.Float64("level")
	if !(lv > 0 && lv < 1) {
		return o, usagef(curveHint, "--level: %g, must lie in (0, 1)", lv)
	}
	if o.plot != "" {
		if ext := strings.ToLower(filepath.Ext(o.plot)); ext != ".svg" && ext != ".png" {
			return o, usagef(curveHint, "--plot: %q must end in .svg or .png", o.plot)
		}
	}
	o.extra = estimate.Options{Target: t, At: at, Bootstrap: b, Level: lv, Seed: o.curve.Seed}
	return o, nil
}

// curveResult is what estimate curve reports (and prints as JSON).
type curveResult struct {
	Split        string                `json:"split"`
	Table        string                `json:"table"`
	Label        string                `json:"label"`
	Features     []string              `json:"features"`
	Columns      []string              `json:"encoded_columns"`
	Model        string                `json:"model"`
	Metric       string                `json:"metric"`
	TrainSides   []string              `json:"train_sides"`
	HoldoutSides []string              `json:"holdout_sides"`
	TrainRows    int                   `json:"train_rows"`
	HoldoutRows  int                   `json:"holdout_rows"`
	Sizes        []int                 `json:"sizes"`
	Repeats      int                   `json:"repeats"`
	Seed         uint64                `json:"seed"`
	Notes        []string              `json:"notes"`
	Measured     []curveMeasured       `json:"measured"`
	Capacities   []curveCapacity       `json:"capacities"`
	BestAt       []estimate.SizeBest   `json:"best_at_size"`
	Target       float64               `json:"target,omitempty"`
	At           float64               `json:"at,omitempty"`
	BestCapacity *float64              `json:"best_capacity"`
	BestNStar    *estimate.Interval    `json:"best_nstar"`
	Verdict      string                `json:"verdict"`
	Caution      string                `json:"caution"`
	RunID        int64                 `json:"run_id"`
	report       *estimate.SweepReport `json:"-"`
	points       []estimate.CurvePoint `json:"-"`
}

type curveMeasured struct {
	Capacity   float64 `json:"capacity"`
	Size       int     `json:"size"`
	TrainMean  float64 `json:"train_err_mean"`
	HoldMean   float64 `json:"holdout_err_mean"`
	HoldSD     float64 `json:"holdout_err_sd"`
	HoldMin    float64 `json:"holdout_err_min"`
	HoldMax    float64 `json:"holdout_err_max"`
	Repeats    int     `json:"repeats"`
	BestAtSize bool    `json:"best_at_size"`
}

type curveCapacity struct {
	Capacity    float64            `json:"capacity"`
	Family      string             `json:"family,omitempty"`
	Params      []float64          `json:"params,omitempty"`
	BacktestErr *float64           `json:"backtest_err"`
	Asymptote   *estimate.Interval `json:"asymptote,omitempty"`
	NStar       *estimate.Interval `json:"nstar,omitempty"`
	Reachable   *bool              `json:"reachable,omitempty"`
	AtErr       *estimate.Interval `json:"at_err,omitempty"`
	Variance    *bool              `json:"variance_limited,omitempty"`
	ReachedAt   int                `json:"target_met_at_size,omitempty"`
	Verdict     string             `json:"verdict"`
	// Added: the honesty flags of the extrapolation (see estimate.Result).
	Flat                bool         `json:"flat,omitempty"`
	AsymptoteIdentified *bool        `json:"asymptote_identified,omitempty"`
	AsymptoteLoAtBound  bool         `json:"asymptote_lo_at_bound,omitempty"`
	HorizonN            float64      `json:"horizon_n,omitempty"`
	NStarBeyondHorizon  *bool        `json:"nstar_beyond_horizon,omitempty"`
	GapBySize           []curveGapAt `json:"gap_by_size,omitempty"`
	// Band is the chosen curve's pointwise bootstrap band (estimate.Result.Band).
	Band []estimate.BandPoint `json:"band,omitempty"`
	res  *estimate.Result
}

// curveGapAt is the train–holdout gap at one size (a JSON-safe estimate.GapAt).
type curveGapAt struct {
	N               float64  `json:"n"`
	Train           float64  `json:"train_err_mean"`
	Holdout         float64  `json:"holdout_err_mean"`
	Ratio           *float64 `json:"ratio"`
	VarianceLimited bool     `json:"variance_limited"`
}

func finite(v float64) *float64 {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return nil
	}
	return &v
}

// measureCurves runs the whole estimate curve computation inside tx and stores it.
func measureCurves(ctx context.Context, tx *store.Tx, o curveOptions, prog *progress) (*curveResult, error) {
	ld, err := estimate.LoadSplit(ctx, tx.Conn, o.spec)
	if err != nil {
		return nil, curveErr(err)
	}
	co := o.curve
	co.Progress = prog.Report
	pts, err := estimate.MeasureCurves(ctx, ld.Train, ld.Holdout, &co)
	prog.Done()
	if err != nil {
		return nil, curveErr(err)
	}
	fitProg := newProgress(prog.w, "estimate curve: bootstrap refits")
	extra := o.extra
	extra.Progress = fitProg.Report
	rep, err := estimate.Summarise(pts, co.Model, metricOf(co), ld.Train.N, &extra)
	fitProg.Done()
	if err != nil {
		return nil, curveErr(err)
	}
	resolved := co
	resolved.Metric = metricOf(co)
	resolved.Sizes = sizesOf(pts)
	cr := &estimate.CurveRun{RunID: tx.RunID, Spec: o.spec, Loaded: ld, Options: resolved, Points: pts, Report: rep}
	if err := estimate.SaveCurves(ctx, tx.Conn, cr); err != nil {
		return nil, err
	}
	res := &curveResult{Split: o.spec.Split, Table: ld.Table, Label: o.spec.Label, Features: o.spec.Features,
		Columns: ld.Columns, Model: co.Model, Metric: resolved.Metric, TrainSides: ld.TrainSides,
		HoldoutSides: ld.HoldoutSides, TrainRows: ld.Train.N, HoldoutRows: ld.Holdout.N, Sizes: resolved.Sizes,
		Repeats: co.Repeats, Seed: co.Seed, Notes: orEmptyStrings(ld.Notes), BestAt: rep.BestAt, Verdict: rep.Verdict,
		Caution: rep.Caution, RunID: tx.RunID, report: rep, points: pts, Target: o.extra.Target, At: o.extra.At}
	if rep.BestNStar != nil {
		c := rep.BestCapacity
		res.BestCapacity, res.BestNStar = &c, rep.BestNStar
	}
	res.Measured = summarisePoints(pts, rep.BestAt)
	for _, c := range rep.Capacities {
		cc := curveCapacity{Capacity: c.Capacity}
		if r := c.Result; r != nil {
			cc.Family, cc.Params, cc.BacktestErr = r.Best.Family, r.Best.Params, finite(r.Best.BacktestErr)
			a := r.Asymptote
			cc.NStar, cc.AtErr, cc.Verdict = r.NStar, r.AtErr, r.Verdict
			if a.Method != "none" { // log2 has no asymptote
				cc.Asymptote = &a
			}
			if r.NStar != nil {
				reach := r.Reachable
				cc.Reachable = &reach
			}
			if r.Gap != nil {
				v := r.Gap.VarianceLimited
				cc.Variance = &v
				for _, g := range r.Gap.BySize {
					cc.GapBySize = append(cc.GapBySize, curveGapAt{N: g.N, Train: g.Train, Holdout: g.Holdout, Ratio: finite(g.Ratio), VarianceLimited: g.VarianceLimited})
				}
			}
			cc.res, cc.Flat, cc.AsymptoteLoAtBound, cc.HorizonN = r, r.Flat, r.AsymptoteLoAtBound, r.HorizonN
			cc.Band = r.Band
			if a.Method != "none" {
				id := !r.AsymptoteUnidentified
				cc.AsymptoteIdentified = &id
			}
			if r.NStar != nil {
				b := r.NStarBeyondHorizon
				cc.NStarBeyondHorizon = &b
			}
		} else {
			cc.Verdict = "no curve could be fitted: " + c.Err
		}
		if c.Reached {
			cc.ReachedAt = c.ReachedAt
			cc.Verdict = fmt.Sprintf("The target is met by the measurements from n = %d on. %s", c.ReachedAt, cc.Verdict)
		}
		res.Capacities = append(res.Capacities, cc)
	}
	tx.SetDetail("split", o.spec.Split)
	tx.SetDetail("model", co.Model)
	tx.SetDetail("metric", resolved.Metric)
	tx.SetDetail("capacities", co.Capacities)
	tx.SetDetail("sizes", resolved.Sizes)
	tx.SetDetail("repeats", co.Repeats)
	tx.SetDetail("seed", co.Seed)
	tx.SetDetail("target", o.extra.Target)
	tx.SetDetail("at", o.extra.At)
	tx.SetDetail("bootstrap", o.extra.Bootstrap)
	tx.SetDetail("ridge", co.Ridge)
	tx.SetDetail("l2", co.L2)
	if err := tx.AddAuditQuery(ctx, fmt.Sprintf("estimate_curve:%d", tx.RunID), "curve_means", "report",
		"mean training and holdout error per capacity and size of this run's measured points",
		fmt.Sprintf(`SELECT capacity, size, avg(train_err) AS train_err, avg(holdout_err) AS holdout_err, count(*) AS repeats FROM ss_est_curve_points WHERE run_id = %d GROUP BY capacity, size ORDER BY capacity, size`, tx.RunID), false); err != nil {
		return nil, err
	}
	return res, nil
}

func orEmptyStrings(s []string) []string {
	if s == nil {
		return []string{}
	}
	return s
}

func metricOf(co estimate.CurveOptions) string {
	if co.Metric != "" {
		return co.Metric
	}
	if co.Model == "logistic" {
		return "error"
	}
	return "mse"
}

func sizesOf(pts []estimate.CurvePoint) []int {
	seen := map[int]bool{}
	var out []int
	for _, p := range pts {
		if !seen[p.Size] {
			seen[p.Size] = true
			out = append(out, p.Size)
		}
	}
	sortInts(out)
	return out
}

func sortInts(a []int) {
	for i := 1; i < len(a); i++ {
		for j := i; j > 0 && a[j] < a[j-1]; j-- {
			a[j], a[j-1] = a[j-1], a[j]
		}
	}
}

func summarisePoints(pts []estimate.CurvePoint, best []estimate.SizeBest) []curveMeasured {
	var out []curveMeasured
	for i := 0; i < len(pts); {
		j := i
		m := curveMeasured{Capacity: pts[i].Capacity, Size: pts[i].Size, HoldMin: math.Inf(1), HoldMax: math.Inf(-1)}
		for j < len(pts) && pts[j].Capacity == m.Capacity && pts[j].Size == m.Size {
			m.TrainMean += pts[j].TrainErr
			m.HoldMean += pts[j].HoldoutErr
			m.HoldMin = math.Min(m.HoldMin, pts[j].HoldoutErr)
			m.HoldMax = math.Max(m.HoldMax, pts[j].HoldoutErr)
			j++
		}
		k := float64(j - i)
		m.Repeats = j - i
		m.TrainMean /= k
		m.HoldMean /= k
		if j-i > 1 {
			var ss float64
			for _, p := range pts[i:j] {
				ss += (p.HoldoutErr - m.HoldMean) * (p.HoldoutErr - m.HoldMean)
			}
			m.HoldSD = math.Sqrt(ss / (k - 1))
			if m.HoldSD <= 1e-9*math.Abs(m.HoldMean) { // identical subsets (the whole side): rounding only
				m.HoldSD = 0
			}
		}
		for _, b := range best {
			if b.Size == m.Size && b.Capacity == m.Capacity {
				m.BestAtSize = true
			}
		}
		out = append(out, m)
		i = j
	}
	return out
}

// curveErr turns the estimate package's input errors into usage errors (exit 2).
func curveErr(err error) error {
	if errors.Is(err, estimate.ErrInput) {
		return asUsage(err, curveHint)
	}
	return err
}

func runEstimateCurve(ctx context.Context, cc *cli.Context, o curveOptions, s stdio) error {
	prog := newProgress(s.err, "estimate curve "+o.spec.Split+": fits")
	var res *curveResult
	err := update(ctx, cc, o.db, false, func(ctx context.Context, tx *store.Tx) error {
		r, err := measureCurves(ctx, tx, o, prog)
		if err != nil {
			return err
		}
		res = r
		if o.plot != "" {
			if err := writeCurvePlot(o.plot, r); err != nil {
				return err
			}
		}
		return nil
	})
	if err != nil {
		return err
	}
	return printCurve(s.out, res, o.format)
}

// writeCurvePlot renders the curves to path atomically (temporary file, then rename).
func writeCurvePlot(path string, r *curveResult) error {
	title := fmt.Sprintf("%s on split %s: %s %s", r.Label, r.Split, r.Model, r.Metric)
	ylab := r.Metric
	if ylab == "auc" {
		ylab = "1 − AUC"
	}
	pl, err := estimate.PlotCurves(r.points, r.report, estimate.PlotOptions{Title: title, YLabel: ylab})
	if err != nil {
		return fmt.Errorf("plot %s: %w", path, err)
	}
	ext := filepath.Ext(path)
	tmp := filepath.Join(filepath.Dir(path), "."+strings.TrimSuffix(filepath.Base(path), ext)+".tmp"+ext)
	if err := estimate.SavePlot(pl, tmp); err != nil {
		os.Remove(tmp)
		return fmt.Errorf("plot %s: %w", path, err)
	}
	if err := os.Rename(tmp, path); err != nil {
		os.Remove(tmp)
		return fmt.Errorf("plot %s: %w", path, err)
	}
	return nil
}

func g4(v float64) string {
	if math.IsInf(v, 1) {
		return "unbounded"
	}
	if math.IsNaN(v) {
		return ""
	}
	return strconv.FormatFloat(v, 'g', 4, 64)
}

func nstarCell(iv *estimate.Interval) string {
	if iv == nil {
		return ""
	}
	if math.IsInf(iv.Est, 1) {
		return "unbounded"
	}
	return fmt.Sprintf("%s [%s, %s]", g4(math.Ceil(iv.Est)), g4(math.Ceil(iv.Lo)), g4(math.Ceil(iv.Hi)))
}

func nstarCurveCell(res *estimate.Result, target float64) string {
	return estimate.NStarSummary(res, target)
}

func ivCell(iv *estimate.Interval) string {
	if iv == nil {
		return ""
	}
	return fmt.Sprintf("%s [%s, %s]", g4(iv.Est), g4(iv.Lo), g4(iv.Hi))
}

func printCurve(w io.Writer, r *curveResult, format string) error {
	if format == "json" {
		return writeJSON(w, r)
	}
	lab := func(c float64) string { return estimate.CapacityLabel(r.Model, c) }
	fmt.Fprintf(w, "estimate curve: split %s (table %s), label %s, features %s\n", r.Split, r.Table, r.Label, strings.Join(r.Features, ", "))
	fmt.Fprintf(w, "model %s, metric %s, %d repeats, seed %d; training side %s: %d rows; holdout side %s: %d rows; %d encoded columns\n",
		r.Model, r.Metric, r.Repeats, r.Seed, strings.Join(r.TrainSides, "+"), r.TrainRows, strings.Join(r.HoldoutSides, "+"), r.HoldoutRows, len(r.Columns))
	for _, n := range r.Notes {
		fmt.Fprintf(w, "  note: %s\n", n)
	}
	fmt.Fprintln(w)
	ml := r.Metric
	if ml == "auc" {
		ml = "1−auc"
	}
	t := &table{Header: []string{"capacity", "n", "train " + ml, "holdout " + ml, "holdout sd", "best"}}
	for _, m := range r.Measured {
		best := ""
		if m.BestAtSize {
			best = "*"
		}
		t.add(lab(m.Capacity), m.Size, g4(m.TrainMean), g4(m.HoldMean), g4(m.HoldSD), best)
	}
	if err := t.write(w, "table"); err != nil {
		return err
	}
	fmt.Fprintln(w)
	hdr := []string{"capacity", "curve", "backtest err", "asymptote [interval]"}
	if r.Target > 0 {
		hdr = append(hdr, fmt.Sprintf("n* for %g [interval]", r.Target))
	}
	if r.At > 0 {
		hdr = append(hdr, fmt.Sprintf("error at n = %g [interval]", r.At))
	}
	ft := &table{Header: hdr}
	for _, c := range r.Capacities {
		bt := ""
		if c.BacktestErr != nil {
			bt = fmt.Sprintf("%.1f%%", 100**c.BacktestErr)
		}
		fam := c.Family
		if fam == "" {
			fam = "(none)"
		}
		asy := ivCell(c.Asymptote)
		if c.Asymptote == nil && c.Family != "" {
			asy = "none"
		}
		if c.res != nil && c.Asymptote != nil {
			v, lo, hi := asymptoteCells(c.res)
			asy = fmt.Sprintf("%s [%s, %s]", v, lo, hi)
		}
		cells := []any{lab(c.Capacity), fam, bt, asy}
		if r.Target > 0 {
			ns := nstarCell(c.NStar)
			if c.res != nil && c.res.NStar != nil {
				ns = nstarCurveCell(c.res, r.Target)
			}
			if c.ReachedAt > 0 {
				ns = fmt.Sprintf("met at n = %d (measured)", c.ReachedAt)
			}
			cells = append(cells, ns)
		}
		if r.At > 0 {
			cells = append(cells, ivCell(c.AtErr))
		}
		ft.add(cells...)
	}
	if err := ft.write(w, "table"); err != nil {
		return err
	}
	fmt.Fprintln(w)
	for _, c := range r.Capacities {
		fmt.Fprintf(w, "%s: %s\n", lab(c.Capacity), c.Verdict)
	}
	fmt.Fprintf(w, "\n%s\n", r.Verdict)
	fmt.Fprintf(w, "stored: ss_est_curve_runs, ss_est_curve_points, ss_est_curve_fits (run %d)\n", r.RunID)
	return nil
}

// demoEstimateStep is the demo's estimate step: capacity sweeps on split "sound" of table
// "pipes" for wall loss (ridge, degrees 1–8) and for the repair label (logistic), with targets,
// n* and plots in dir, and the planner's answer in plain sentences.
func demoEstimateStep(ctx context.Context, w io.Writer, db, dir string) error {
	type sweep struct {
		label, title string
		args         []string
		plot         string
	}
	sweeps := []sweep{
		{"wall_loss_pct", "wall loss (%)", []string{"--label", "wall_loss_pct", "--features", "install_year,pressure_kpa,soil_moisture",
			"--model", "ridge", "--capacity", "1,2,3,4,5,6,7,8", "--metric", "rmse"}, "estimate_wall_loss.svg"},
		{"repaired_365d", "repair within 365 days", []string{"--label", "repaired_365d", "--features", "wall_loss_pct,prior_breaks",
			"--model", "logistic", "--capacity", "1,2,3", "--metric", "logloss"}, "estimate_repair.svg"},
	}
	var log strings.Builder // every command's full output, for DIR/estimate.txt
	run := func(args ...string) (string, error) {
		var out, errb strings.Builder
		fmt.Fprintf(&log, "$ splitsmith %s\n", strings.Join(args, " "))
		err := runCLI(ctx, stdio{in: strings.NewReader(""), out: &out, err: &errb}, args...)
		log.WriteString(out.String())
		return out.String(), err
	}
	for _, sw := range sweeps {
		base := append([]string{"estimate", "curve", "--db", db, "--split", "sound"}, sw.args...)
		// The planner's question: what would it take to get 3% below today's best holdout
		// error? A one-repeat probe gives today's error at the whole training side (every
		// repeat uses the whole side there, so one is enough).
		probe, err := run(append(append([]string(nil), base...), "--repeats", "1", "--bootstrap", "20", "--format", "json")...)
		if err != nil {
			return fmt.Errorf("demo estimate %s: %w", sw.label, err)
		}
		var pr curveResult
		if err := json.Unmarshal([]byte(probe), &pr); err != nil {
			return fmt.Errorf("demo estimate %s: %w", sw.label, err)
		}
		now := math.Inf(1)
		for _, m := range pr.Measured {
			if m.Size == pr.TrainRows {
				now = math.Min(now, m.HoldMean)
			}
		}
		target := strconv.FormatFloat(0.97*now, 'g', 3, 64)
		out, err := run(append(append([]string(nil), base...), "--target", target, "--bootstrap", "200", "--plot", filepath.Join(dir, sw.plot), "--format", "json")...)
		if err != nil {
			return fmt.Errorf("demo estimate %s: %w", sw.label, err)
		}
		var r struct {
			Metric       string              `json:"metric"`
			Model        string              `json:"model"`
			TrainRows    int                 `json:"train_rows"`
			BestCapacity *float64            `json:"best_capacity"`
			BestNStar    *estimate.Interval  `json:"best_nstar"`
			BestAt       []estimate.SizeBest `json:"best_at_size"`
			Capacities   []curveCapacity     `json:"capacities"`
		}
		if err := json.Unmarshal([]byte(out), &r); err != nil {
			return fmt.Errorf("demo estimate %s: %w", sw.label, err)
		}
		fmt.Fprintf(w, "estimate, %s: today's best holdout %s is %.4g; target %s (3%% lower). ", sw.title, r.Metric, now, target)
		var unreach, unsettled, far []string
		for _, c := range r.Capacities {
			switch {
			case c.Reachable == nil || *c.Reachable:
			case c.AsymptoteIdentified != nil && !*c.AsymptoteIdentified:
				unsettled = append(unsettled, strconv.FormatFloat(c.Capacity, 'g', -1, 64))
			case c.NStarBeyondHorizon != nil && *c.NStarBeyondHorizon:
				far = append(far, strconv.FormatFloat(c.Capacity, 'g', -1, 64))
			default:
				unreach = append(unreach, strconv.FormatFloat(c.Capacity, 'g', -1, 64))
			}
		}
		lab := func(c float64) string { return estimate.CapacityLabel(r.Model, c) }
		switch {
		case r.BestNStar == nil && len(unsettled) > 0:
			fmt.Fprintf(w, "No capacity tried is shown to reach %s %s; more capacity or better features might.", r.Metric, target)
		case r.BestNStar == nil:
			fmt.Fprintf(w, "No capacity tried reaches %s %s; more data will not get there, more capacity or better features might.", r.Metric, target)
		case r.BestNStar.Method == "measured" || r.BestNStar.Est <= float64(r.TrainRows):
			fmt.Fprintf(w, "%s %s is within reach with the %d training rows in hand (%s, from about %.0f rows).", r.Metric, target, r.TrainRows, lab(*r.BestCapacity), math.Ceil(r.BestNStar.Est))
		default:
			ns := r.BestNStar
			hi := "unbounded" // JSON null (+Inf) decodes as 0
			if ns.Hi >= ns.Est {
				hi = fmt.Sprintf("%.0f", math.Ceil(ns.Hi))
			}
			fmt.Fprintf(w, "%s %s needs about %.0f training rows with %s (%s 95%% interval %.0f to %s), %.0f× the %d in hand.",
				r.Metric, target, math.Ceil(ns.Est), lab(*r.BestCapacity), ns.Method, math.Ceil(ns.Lo), hi, ns.Est/float64(r.TrainRows), r.TrainRows)
			if ns.Est > 10*float64(r.TrainRows) {
				fmt.Fprint(w, " That is far beyond the measured sizes: a rough guide only.")
			}
			for _, c := range r.Capacities {
				if c.Capacity == *r.BestCapacity && c.AsymptoteIdentified != nil && !*c.AsymptoteIdentified {
					fmt.Fprint(w, " Its asymptote is not identified by the measured sizes, so this assumes the measured trend goes on.")
				}
			}
		}
		if len(unreach) > 0 && r.BestNStar != nil {
			fmt.Fprintf(w, " With degree %s the curve levels off above the target: more data will not get there.", strings.Join(unreach, ", "))
		}
		if len(far) > 0 {
			fmt.Fprintf(w, " With degree %s it would take more than 1000× the data in hand (not a meaningful extrapolation).", strings.Join(far, ", "))
		}
		if len(unsettled) > 0 {
			fmt.Fprintf(w, " With degree %s the asymptote is not identified by the measured sizes: whether more data would get there is not settled.", strings.Join(unsettled, ", "))
		}
		if n := len(r.BestAt); n > 0 {
			fmt.Fprintf(w, " Best now (n = %d): %s.", r.BestAt[n-1].Size, lab(r.BestAt[n-1].Capacity))
		}
		fmt.Fprintf(w, "\n  plot: %s\n", filepath.Join(dir, sw.plot))
	}
	fmt.Fprintf(w, "  %s\n", estimate.Caution)
	if err := os.WriteFile(filepath.Join(dir, "estimate.txt"), []byte(log.String()), 0o644); err != nil {
		return fmt.Errorf("demo estimate: %w", err)
	}
	return nil
}
