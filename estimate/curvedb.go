package estimate

// Reading a split's sides into feature matrices, and storing measured curves.

import (
	"context"
	"database/sql"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"sort"
	"strings"
)

// ErrInput marks a mistake in what the caller asked for (unknown split, side or column, a
// column that cannot be a feature or label): the CLI reports it as a usage error.
var ErrInput = errors.New("bad input")

// inputError marks an error as ErrInput without changing its message.
type inputError struct{ error }

func (e inputError) Is(target error) bool { return target == ErrInput }
func (e inputError) Unwrap() error        { return e.error }

func inputf(format string, a ...any) error { return inputError{fmt.Errorf(format, a...)} }

// MaxLevels is the most levels a categorical feature may have on the training side; each
// level but the reference becomes one column (common practice, no source).
const MaxLevels = 50

// LoadSpec says which split, sides and columns to read.
type LoadSpec struct {
	Split       string
	Label       string
	Features    []string
	TrainSide   string // "" → every side whose role is 'train'
	HoldoutSide string // "" → every side whose role is 'holdout'
}

// Loaded is a split read into memory.
type Loaded struct {
	Table          string
	Train, Holdout Data
	TrainSides     []string
	HoldoutSides   []string
	Columns        []string // encoded input columns, in Data order
	DroppedLabel   int      // rows skipped because the label is missing
	UnseenLevels   int      // holdout values of a categorical feature not on the training side
	Notes          []string // the encoding rules applied, for the report
}

type colInfo struct {
	name, logical string
}

// LoadSplit reads the split's training and holdout sides into feature matrices (rows in
// ss_row order). Encoding, decided from the training side only:
//   - INTEGER, REAL, BOOLEAN columns are numeric; a missing value becomes the training-side
//     mean and, when the training side has any missing, a 0/1 column "<col>:missing" is added
//     (as a main effect only: it enters no polynomial product);
//   - TEXT columns are categorical: one 0/1 column "<col>=<level>" per training-side level
//     except the most frequent (the reference; ties by name); a missing value is its own level
//     "(missing)"; a holdout value never seen in training counts as the reference;
//   - DATE and TIMESTAMP columns are refused (derive a numeric column, e.g. an age, first);
//   - rows whose label is missing are skipped and counted.
func LoadSplit(ctx context.Context, conn *sql.Conn, spec LoadSpec) (*Loaded, error) {
	ld := &Loaded{}
	err := conn.QueryRowContext(ctx, `SELECT table_name FROM ss_splits WHERE split_name = ?`, spec.Split).Scan(&ld.Table)
	if errors.Is(err, sql.ErrNoRows) {
		return nil, inputf("split %q: no such split (splitsmith splits lists them)", spec.Split)
	}
	if err != nil {
		return nil, fmt.Errorf("read split %s: %w", spec.Split, err)
	}
	rows, err := conn.QueryContext(ctx, `SELECT side, role FROM ss_split_sides WHERE split_name = ? ORDER BY position`, spec.Split)
	if err != nil {
		return nil, fmt.Errorf("read split %s sides: %w", spec.Split, err)
	}
	var allSides []string
	for rows.Next() {
		var side, role string
		if err := rows.Scan(&side, &role); err != nil {
			rows.Close()
			return nil, err
		}
		allSides = append(allSides, side)
		if (spec.TrainSide == "" && role == "train") || side == spec.TrainSide {
			ld.TrainSides = append(ld.TrainSides, side)
		}
		if (spec.HoldoutSide == "" && role == "holdout") || side == spec.HoldoutSide {
			ld.HoldoutSides = append(ld.HoldoutSides, side)
		}
	}
	rows.Close()
	if err := rows.Err(); err != nil {
		return nil, err
	}
	if len(ld.TrainSides) == 0 {
		if spec.TrainSide != "" {
			return nil, inputf("split %s: no side %q (sides: %s)", spec.Split, spec.TrainSide, strings.Join(allSides, ", "))
		}
		return nil, inputf("split %s: no side has role train", spec.Split)
	}
	if len(ld.HoldoutSides) == 0 {
		if spec.HoldoutSide != "" {
			return nil, inputf("split %s: no side %q (sides: %s)", spec.Split, spec.HoldoutSide, strings.Join(allSides, ", "))
		}
		return nil, inputf("split %s: no side has role holdout", spec.Split)
	}
	for _, s := range ld.TrainSides {
		for _, h := range ld.HoldoutSides {
			if s == h {
				return nil, inputf("split %s: side %s cannot be both the training and the holdout side", spec.Split, s)
			}
		}
	}
	// Columns.
	cols := map[string]colInfo{}
	var names []string
	crow, err := conn.QueryContext(ctx, `SELECT name, logical_type FROM ss_columns WHERE table_name = ? ORDER BY position`, ld.Table)
	if err != nil {
		return nil, fmt.Errorf("read columns of %s: %w", ld.Table, err)
	}
	for crow.Next() {
		var c colInfo
		if err := crow.Scan(&c.name, &c.logical); err != nil {
			crow.Close()
			return nil, err
		}
		cols[c.name] = c
		names = append(names, c.name)
	}
	crow.Close()
	lookup := func(what, name string) (colInfo, error) {
		c, ok := cols[name]
		if !ok {
			return c, inputf("%s %q: no such column in table %s (columns: %s)", what, name, ld.Table, strings.Join(names, ", "))
		}
		return c, nil
	}
	label, err := lookup("--label", spec.Label)
	if err != nil {
		return nil, err
	}
	if !numericType(label.logical) {
		return nil, inputf("--label %s: column is %s; the label must be numeric (INTEGER, REAL or BOOLEAN)", label.name, label.logical)
	}
	if len(spec.Features) == 0 {
		return nil, inputf("--features: at least one column is needed")
	}
	var feats []colInfo
	seen := map[string]bool{}
	for _, f := range spec.Features {
		c, err := lookup("--features", f)
		if err != nil {
			return nil, err
		}
		if f == spec.Label {
			return nil, inputf("--features %s: the label cannot also be a feature", f)
		}
		if seen[f] {
			return nil, inputf("--features %s: listed twice", f)
		}
		seen[f] = true
		if c.logical == "DATE" || c.logical == "TIMESTAMP" {
			return nil, inputf("--features %s: column is %s; derive a numeric column (an age, a day number) to use it", f, c.logical)
		}
		feats = append(feats, c)
	}
	// Read the rows.
	quoted := make([]string, len(feats))
	for i, f := range feats {
		quoted[i] = "t." + quoteIdent(f.name)
	}
	sides := append(append([]string(nil), ld.TrainSides...), ld.HoldoutSides...)
	ph := strings.TrimSuffix(strings.Repeat("?,", len(sides)), ",")
	q := fmt.Sprintf(`SELECT t.ss_row, r.side, t.%s, %s FROM %s t JOIN ss_split_rows r ON r.row_id = t.ss_row AND r.split_name = ? WHERE r.side IN (%s) ORDER BY t.ss_row`,
		quoteIdent(label.name), strings.Join(quoted, ", "), quoteIdent(ld.Table), ph)
	args := []any{spec.Split}
	for _, s := range sides {
		args = append(args, s)
	}
	drows, err := conn.QueryContext(ctx, q, args...)
	if err != nil {
		return nil, fmt.Errorf("read %s: %w", ld.Table, err)
	}
	defer drows.Close()
	isTrain := map[string]bool{}
	for _, s := range ld.TrainSides {
		isTrain[s] = true
	}
	type rawRow struct {
		id    int64
		train bool
		y     float64
		v     []any
	}
	var raw []rawRow
	for drows.Next() {
		var rowID int64
		var side string
		var yv any
		vals := make([]any, len(feats))
		dest := []any{&rowID, &side, &yv}
		for i := range vals {
			dest = append(dest, &vals[i])
		}
		if err := drows.Scan(dest...); err != nil {
			return nil, fmt.Errorf("read %s: %w", ld.Table, err)
		}
		if yv == nil {
			ld.DroppedLabel++
			continue
		}
		y, ok := toFloat(yv)
		if !ok {
			return nil, fmt.Errorf("table %s row %d (ss_row), column %s: value %v is not a number", ld.Table, rowID, label.name, yv)
		}
		for i, f := range feats {
			if vals[i] == nil || !numericType(f.logical) {
				continue
			}
			if _, ok := toFloat(vals[i]); !ok {
				return nil, fmt.Errorf("table %s row %d (ss_row), column %s: value %v is not a number", ld.Table, rowID, f.name, vals[i])
			}
		}
		raw = append(raw, rawRow{rowID, isTrain[side], y, vals})
	}
	if err := drows.Err(); err != nil {
		return nil, err
	}
	// Encoders from the training side.
	type encoder struct {
		numeric  bool
		mean     float64
		missing  bool     // numeric: add a missing indicator
		levels   []string // categorical: non-reference levels
		ref      string   // categorical: the reference level
		levelIdx map[string]int
	}
	encs := make([]encoder, len(feats))
	p := 0
	var groups []int
	group := 0
	for i, f := range feats {
		e := &encs[i]
		if numericType(f.logical) {
			e.numeric = true
			var s float64
			var n, nmiss int
			binary := true
			for _, r := range raw {
				if !r.train {
					continue
				}
				if r.v[i] == nil {
					nmiss++
					continue
				}
				x, _ := toFloat(r.v[i])
				s += x
				n++
				binary = binary && (x == 0 || x == 1)
			}
			if n == 0 {
				return nil, inputf("--features %s: every value on the training side is missing", f.name)
			}
			e.mean = s / float64(n)
			e.missing = nmiss > 0
			ld.Columns = append(ld.Columns, f.name)
			if binary || f.logical == "BOOLEAN" {
				groups = append(groups, group)
				group++
			} else {
				groups = append(groups, -1)
			}
			p++
			if e.missing {
				ld.Columns = append(ld.Columns, f.name+":missing")
				groups = append(groups, LinearOnly)
				p++
				ld.Notes = append(ld.Notes, fmt.Sprintf("%s: %d missing training values set to the training mean %g, with indicator %s:missing (a main effect, in no product)", f.name, nmiss, e.mean, f.name))
			}
			continue
		}
		counts := map[string]int{}
		for _, r := range raw {
			if r.train {
				counts[levelOf(r.v[i])]++
			}
		}
		lv := make([]string, 0, len(counts))
		for l := range counts {
			lv = append(lv, l)
		}
		sort.Slice(lv, func(a, b int) bool {
			if counts[lv[a]] != counts[lv[b]] {
				return counts[lv[a]] > counts[lv[b]]
			}
			return lv[a] < lv[b]
		})
		if len(lv) > MaxLevels {
			return nil, inputf("--features %s: %d levels on the training side, at most %d are one-hot encoded", f.name, len(lv), MaxLevels)
		}
		e.levels, e.ref = lv[1:], lv[0]
		e.levelIdx = map[string]int{}
		for j, l := range e.levels {
			e.levelIdx[l] = j
			ld.Columns = append(ld.Columns, f.name+"="+l)
			groups = append(groups, group)
			p++
		}
		group++
		ld.Notes = append(ld.Notes, fmt.Sprintf("%s: one-hot, %d levels, reference %q (most frequent on the training side)", f.name, len(lv), lv[0]))
	}
	if p == 0 {
		return nil, inputf("--features: every feature is constant on the training side")
	}
	var nTrain, nHold int
	for _, r := range raw {
		if r.train {
			nTrain++
		} else {
			nHold++
		}
	}
	ld.Train = Data{X: make([]float64, 0, nTrain*p), Y: make([]float64, 0, nTrain), N: nTrain, P: p, Groups: groups}
	ld.Holdout = Data{X: make([]float64, 0, nHold*p), Y: make([]float64, 0, nHold), N: nHold, P: p, Groups: groups}
	for _, r := range raw {
		d := &ld.Holdout
		if r.train {
			d = &ld.Train
		}
		for i := range feats {
			e := &encs[i]
			if e.numeric {
				if r.v[i] == nil {
					d.X = append(d.X, e.mean)
				} else {
					x, _ := toFloat(r.v[i])
					d.X = append(d.X, x)
				}
				if e.missing {
					d.X = append(d.X, b2f(r.v[i] == nil))
				}
				continue
			}
			l := levelOf(r.v[i])
			j, ok := e.levelIdx[l]
			for k := range e.levels {
				d.X = append(d.X, b2f(ok && k == j))
			}
			if !r.train && !ok && l != e.ref {
				ld.UnseenLevels++
			}
		}
		d.Y = append(d.Y, r.y)
		d.Rows = append(d.Rows, r.id)
	}
	if nTrain == 0 {
		return nil, inputf("split %s: the training side has no rows with a label", spec.Split)
	}
	if nHold == 0 {
		return nil, inputf("split %s: the holdout side has no rows with a label", spec.Split)
	}
	if ld.DroppedLabel > 0 {
		ld.Notes = append(ld.Notes, fmt.Sprintf("%s: %d rows with a missing label skipped", label.name, ld.DroppedLabel))
	}
	if ld.UnseenLevels > 0 {
		ld.Notes = append(ld.Notes, fmt.Sprintf("%d holdout values of categorical features were never seen in training and count as the reference level", ld.UnseenLevels))
	}
	return ld, nil
}

func b2f(b bool) float64 {
	if b {
		return 1
	}
	return 0
}

func numericType(logical string) bool {
	return logical == "INTEGER" || logical == "REAL" || logical == "BOOLEAN"
}

func levelOf(v any) string {
	switch x := v.(type) {
	case nil:
		return "(missing)"
	case string:
		return x
	case []byte:
		return string(x)
	}
	return fmt.Sprint(v)
}

func toFloat(v any) (float64, bool) {
	switch x := v.(type) {
	case int64:
		return float64(x), true
	case float64:
		return x, !math.IsNaN(x) && !math.IsInf(x, 0)
	case bool:
		return b2f(x), true
	}
	return 0, false
}

func quoteIdent(s string) string { return `"` + strings.ReplaceAll(s, `"`, `""`) + `"` }

// CurveRun describes a stored estimate-curve run.
type CurveRun struct {
	RunID   int64
	Spec    LoadSpec
	Loaded  *Loaded
	Options CurveOptions // resolved
	Points  []CurvePoint
	Report  *SweepReport
}

func nullable(v float64) any {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return nil
	}
	return v
}

// SaveCurves writes a run's measured points and fits into ss_est_curve_runs,
// ss_est_curve_points and ss_est_curve_fits, and each capacity's extrapolation (every family
// tried) into ss_est_fits and ss_est_estimates under the subject
// "curve:<split>:<model>:<capacity>" (inside the caller's transaction).
func SaveCurves(ctx context.Context, conn *sql.Conn, cr *CurveRun) error {
	js := func(v any) string {
		b, _ := json.Marshal(v)
		return string(b)
	}
	rep := cr.Report
	var target, at, bestC, bestN any
	if rep.Target != 0 {
		target = rep.Target
	}
	if rep.At != 0 {
		at = rep.At
	}
	if rep.BestNStar != nil {
		bestC, bestN = rep.BestCapacity, nullable(rep.BestNStar.Est)
	}
	_, err := conn.ExecContext(ctx, `INSERT INTO ss_est_curve_runs (run_id, split_name, table_name, label, features_json,
		encoded_json, model, metric, train_sides, holdout_sides, train_rows, holdout_rows, repeats, seed, target, at_n,
		best_capacity, best_nstar, verdict, caution) VALUES (?,?,?,?,?,?,?,?,?,?,?,?,?,?,?,?,?,?,?,?)`,
		cr.RunID, cr.Spec.Split, cr.Loaded.Table, cr.Spec.Label, js(cr.Spec.Features), js(cr.Loaded.Columns),
		cr.Options.Model, cr.Options.Metric, js(cr.Loaded.TrainSides), js(cr.Loaded.HoldoutSides),
		cr.Loaded.Train.N, cr.Loaded.Holdout.N, cr.Options.Repeats, int64(cr.Options.Seed), target, at, bestC, bestN,
		rep.Verdict, rep.Caution)
	if err != nil {
		return fmt.Errorf("store curve run: %w", err)
	}
	st, err := conn.PrepareContext(ctx, `INSERT INTO ss_est_curve_points (run_id, split_name, model, capacity, size, repeat,
		train_err, holdout_err, metric) VALUES (?,?,?,?,?,?,?,?,?)`)
	if err != nil {
		return fmt.Errorf("store curve points: %w", err)
	}
	defer st.Close()
	for _, p := range cr.Points {
		if _, err := st.ExecContext(ctx, cr.RunID, cr.Spec.Split, cr.Options.Model, p.Capacity, p.Size, p.Repeat, p.TrainErr, p.HoldoutErr, cr.Options.Metric); err != nil {
			return fmt.Errorf("store curve points: %w", err)
		}
	}
	for _, c := range rep.Capacities {
		vals := []any{cr.RunID, c.Capacity}
		if r := c.Result; r != nil {
			iv := func(p *Interval) []any {
				if p == nil {
					return []any{nil, nil, nil}
				}
				return []any{nullable(p.Est), nullable(p.Lo), nullable(p.Hi)}
			}
			vals = append(vals, r.Best.Family, js(r.Best.Params), nullable(r.Best.BacktestErr), nullable(r.Best.AIC))
			vals = append(vals, iv(&r.Asymptote)...)
			vals = append(vals, iv(r.NStar)...)
			var reach any
			if r.NStar != nil {
				reach = b2f(r.Reachable)
			}
			vals = append(vals, reach)
			vals = append(vals, iv(r.AtErr)...)
			vals = append(vals, r.Asymptote.Method)
			var vl, ge any
			if r.Gap != nil {
				vl, ge = b2f(r.Gap.VarianceLimited), nullable(r.Gap.Exponent)
			}
			vals = append(vals, vl, ge, r.Verdict)
		} else {
			vals = append(vals, nil, nil, nil, nil, nil, nil, nil, nil, nil, nil, nil, nil, nil, nil, nil, nil, nil, "no curve could be fitted: "+c.Err)
		}
		if c.Result != nil {
			// Every family's fit and the extrapolation also go where estimate points puts
			// them, under the subject curve:<split>:<model>:<capacity>.
			n := 0
			for _, p := range cr.Points {
				if p.Capacity == c.Capacity {
					n++
				}
			}
			subject := fmt.Sprintf("curve:%s:%s:%g", cr.Spec.Split, cr.Options.Model, c.Capacity)
			if err := SaveResult(ctx, conn, cr.RunID, subject, c.Result, &Options{Target: rep.Target, At: rep.At, Seed: cr.Options.Seed}, n); err != nil {
				return err
			}
		}
		if _, err := conn.ExecContext(ctx, `INSERT INTO ss_est_curve_fits (run_id, capacity, family, params_json, backtest_err, aic,
			asymptote, asymptote_lo, asymptote_hi, nstar, nstar_lo, nstar_hi, reachable, at_err, at_lo, at_hi, interval_method,
			variance_limited, gap_exponent, verdict) VALUES (?,?,?,?,?,?,?,?,?,?,?,?,?,?,?,?,?,?,?,?)`, vals...); err != nil {
			return fmt.Errorf("store curve fits: %w", err)
		}
		if r := c.Result; r != nil {
			id, lob, hor, beyond := honestyValues(r)
			if _, err := conn.ExecContext(ctx, `UPDATE ss_est_curve_fits SET asymptote_identified = ?, asymptote_lo_bound = ?,
				horizon_n = ?, nstar_beyond_horizon = ? WHERE run_id = ? AND capacity = ?`, id, lob, hor, beyond, cr.RunID, c.Capacity); err != nil {
				return fmt.Errorf("store curve fits: %w", err)
			}
		}
	}
	return nil
}
