package leakage

import "fmt"

func runHoldoutAdequacy(a *audit) error {
	p, points, alpha := a.p("error_rate"), a.p("points"), a.p("alpha")
	if p <= 0 || p >= 1 {
		return inputf("--param holdout_adequacy.error_rate=%g: must be between 0 and 1", p)
	}
	if points <= 0 || alpha <= 0 || alpha >= 1 {
		return inputf("holdout_adequacy: points must be positive and alpha between 0 and 1")
	}
	counts := make([]int, len(a.sides))
	for _, s := range a.side {
		counts[s]++
	}
	for si, s := range a.sides {
		if s.Role != "holdout" {
			continue
		}
		n := counts[si]
		se := HoldoutSE(p, n)
		mdd := MinDetectableDifference(p, n, alpha)
		need := RowsToDetect(p, points/100, alpha)
		ev := map[string]any{"rows": n, "error_rate": p, "standard_error": se, "min_detectable_points": 100 * mdd, "rows_needed": need, "alpha": alpha}
		f := Finding{Subject: s.Name, SideA: s.Name, NA: n, Score: se, Evidence: ev}
		if mdd > points/100 {
			f.Severity = Warn
			f.Message = fmt.Sprintf("holdout %s has %d rows: at an error rate of %.0f%% its standard error is %.2f points, so models closer than %.1f points cannot be told apart (alpha %g); about %d rows would resolve %g points. A planning estimate, not a guarantee: defer to local rules and qualified statistical review.",
				s.Name, n, 100*p, 100*se, 100*mdd, alpha, need, points)
		} else {
			f.Severity = Info
			f.Message = fmt.Sprintf("holdout %s has %d rows: at an error rate of %.0f%% its standard error is %.2f points; models %.1f points apart can be told apart (alpha %g). A planning estimate, not a guarantee.",
				s.Name, n, 100*p, 100*se, 100*mdd, alpha)
		}
		a.add(f)
	}
	return nil
}
