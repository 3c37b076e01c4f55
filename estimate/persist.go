package estimate

import (
	"context"
	"database/sql"
	"encoding/json"
	"fmt"
	"math"
)

// dbFloat maps non-finite values to NULL.
func dbFloat(v float64) any {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return nil
	}
	return v
}

// paramsJSON renders a family's parameters as a JSON object name → value (null if not finite).
func paramsJSON(family string, vals []float64) string {
	fam, err := FamilyByName(family)
	m := map[string]any{}
	for i, v := range vals {
		name := fmt.Sprintf("p%d", i)
		if err == nil && i < len(fam.Params) {
			name = fam.Params[i]
		}
		m[name] = dbFloat(v)
	}
	b, _ := json.Marshal(m)
	return string(b)
}

// PointRow is a point with the line of its input, for SavePoints.
type PointRow struct {
	Point
	Kind string // holdout | train
	Line int
}

// SavePoints stores the points a run fitted in ss_est_points (inside the caller's
// transaction).
func SavePoints(ctx context.Context, conn *sql.Conn, runID int64, subject string, rows []PointRow) error {
	st, err := conn.PrepareContext(ctx, `INSERT INTO ss_est_points(run_id, subject, kind, line, n, err, rep) VALUES(?,?,?,?,?,?,?)`)
	if err != nil {
		return err
	}
	defer st.Close()
	for _, r := range rows {
		if _, err := st.ExecContext(ctx, runID, subject, r.Kind, r.Line, r.N, r.Err, r.Repeat); err != nil {
			return fmt.Errorf("save points: %w", err)
		}
	}
	return nil
}

// SaveResult stores an extrapolation in ss_est_fits and ss_est_estimates (inside the
// caller's transaction).
func SaveResult(ctx context.Context, conn *sql.Conn, runID int64, subject string, res *Result, opts *Options, points int) error {
	o := Options{}
	if opts != nil {
		o = *opts
	}
	for _, f := range res.Fits {
		chosen := 0
		if f.Family == res.Best.Family {
			chosen = 1
		}
		if _, err := conn.ExecContext(ctx, `INSERT INTO ss_est_fits(run_id, subject, family, params_json, stderr_json, rss, aic, backtest_err, chosen) VALUES(?,?,?,?,?,?,?,?,?)`,
			runID, subject, f.Family, paramsJSON(f.Family, f.Params), paramsJSON(f.Family, f.StdErr), dbFloat(f.RSS), dbFloat(f.AIC), dbFloat(f.BacktestErr), chosen); err != nil {
			return fmt.Errorf("save fits: %w", err)
		}
	}
	var asy, asyLo, asyHi any
	if res.Asymptote.Method != "none" {
		asy, asyLo, asyHi = dbFloat(res.Asymptote.Est), dbFloat(res.Asymptote.Lo), dbFloat(res.Asymptote.Hi)
	}
	var target, ns, nsLo, nsHi, nsMethod, reach any
	if res.NStar != nil {
		target, ns, nsLo, nsHi, nsMethod = o.Target, dbFloat(res.NStar.Est), dbFloat(res.NStar.Lo), dbFloat(res.NStar.Hi), res.NStar.Method
		reach = 0
		if res.Reachable {
			reach = 1
		}
	}
	var atN, atE, atLo, atHi, atMethod any
	if res.AtErr != nil {
		atN, atE, atLo, atHi, atMethod = o.At, dbFloat(res.AtErr.Est), dbFloat(res.AtErr.Lo), dbFloat(res.AtErr.Hi), res.AtErr.Method
	}
	var ratio, vl any
	if res.Gap != nil {
		ratio = dbFloat(res.Gap.Ratio)
		vl = 0
		if res.Gap.VarianceLimited {
			vl = 1
		}
	}
	_, err := conn.ExecContext(ctx, `INSERT INTO ss_est_estimates(run_id, subject, family, sizes, points, level, bootstrap, seed,
		asymptote, asymptote_lo, asymptote_hi, asymptote_method, target, nstar, nstar_lo, nstar_hi, nstar_method, reachable,
		at_n, at_err, at_lo, at_hi, at_method, train_ratio, variance_limited, verdict)
		VALUES(?,?,?,?,?,?,?,?, ?,?,?,?,?,?,?,?,?,?, ?,?,?,?,?,?,?,?)`,
		runID, subject, res.Best.Family, len(res.Sizes), points, res.Level, res.Bootstrap, int64(o.Seed),
		asy, asyLo, asyHi, res.Asymptote.Method, target, ns, nsLo, nsHi, nsMethod, reach,
		atN, atE, atLo, atHi, atMethod, ratio, vl, res.Verdict)
	if err != nil {
		return fmt.Errorf("save estimate: %w", err)
	}
	id, lob, hor, beyond := honestyValues(res)
	if _, err := conn.ExecContext(ctx, `UPDATE ss_est_estimates SET asymptote_identified = ?, asymptote_lo_bound = ?, horizon_n = ?,
		nstar_beyond_horizon = ? WHERE run_id = ? AND subject = ?`, id, lob, hor, beyond, runID, subject); err != nil {
		return fmt.Errorf("save estimate: %w", err)
	}
	return nil
}

// honestyValues are the 0008 columns of a result: asymptote_identified, asymptote_lo_bound,
// horizon_n, nstar_beyond_horizon (NULL where not applicable).
func honestyValues(res *Result) (identified, loBound, horizon, beyond any) {
	if res.Asymptote.Method != "none" {
		identified, loBound = b01(!res.AsymptoteUnidentified), b01(res.AsymptoteLoAtBound)
	}
	horizon = dbFloat(res.HorizonN)
	if res.NStar != nil {
		beyond = b01(res.NStarBeyondHorizon)
	}
	return
}

func b01(v bool) int {
	if v {
		return 1
	}
	return 0
}

// SaveSampleSize stores each criterion of a closed-form result in ss_est_criteria.
func SaveSampleSize(ctx context.Context, conn *sql.Conn, runID int64, ss *SampleSize, inputs map[string]any) error {
	in, _ := json.Marshal(inputs)
	for _, c := range ss.Criteria {
		binds := 0
		if c.Binds {
			binds = 1
		}
		if _, err := conn.ExecContext(ctx, `INSERT INTO ss_est_criteria(run_id, outcome, criterion, n, value, binds, inputs_json, caution) VALUES(?,?,?,?,?,?,?,?)`,
			runID, ss.Outcome, c.Name, c.N, c.Value, binds, string(in), ss.Caution); err != nil {
			return fmt.Errorf("save criteria: %w", err)
		}
	}
	return nil
}
