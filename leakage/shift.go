package leakage

import (
	"fmt"
	"math"
	"sort"
)

// CategoricalCounts tallies levels of two samples (NULL as the level "\x00"), returning the
// levels in sorted order and both count vectors.
func CategoricalCounts(ref, act []string, refNull, actNull []bool) ([]string, []float64, []float64) {
	idx := map[string]int{}
	var levels []string
	add := func(v string) {
		if _, ok := idx[v]; !ok {
			idx[v] = 0
			levels = append(levels, v)
		}
	}
	for i, v := range ref {
		if refNull[i] {
			v = "\x00"
		}
		add(v)
	}
	for i, v := range act {
		if actNull[i] {
			v = "\x00"
		}
		add(v)
	}
	sort.Strings(levels)
	for i, l := range levels {
		idx[l] = i
	}
	e := make([]float64, len(levels))
	o := make([]float64, len(levels))
	for i, v := range ref {
		if refNull[i] {
			v = "\x00"
		}
		e[idx[v]]++
	}
	for i, v := range act {
		if actNull[i] {
			v = "\x00"
		}
		o[idx[v]]++
	}
	return levels, e, o
}

type shiftStat struct {
	Column string  `json:"column"`
	Kind   string  `json:"kind"`
	PSI    float64 `json:"psi"`
	KSD    float64 `json:"ks_d,omitempty"`
	KSP    float64 `json:"ks_p,omitempty"`
	X2     float64 `json:"chi2,omitempty"`
	DF     int     `json:"df,omitempty"`
	ChiP   float64 `json:"chi2_p,omitempty"`
	V      float64 `json:"cramers_v,omitempty"`
	Levels int     `json:"levels,omitempty"`
}

func finite(x float64) float64 {
	if math.IsNaN(x) || math.IsInf(x, 0) {
		return 0
	}
	return x
}

// colShift is one column's distribution statistics, training against one holdout side.
type colShift struct {
	st     shiftStat
	sev    Severity
	msg    string
	isTime bool
	skip   bool // identifier-like or free text
}

func runDistributionShift(a *audit) error {
	psiWarn, psiErr, alpha, effect := a.p("psi_warn"), a.p("psi_error"), a.p("alpha"), a.p("effect")
	maxLevels := int(a.p("max_levels"))
	cols := append([]string{}, a.feature...)
	if a.label != "" {
		cols = append(cols, a.label)
	}
	isText := map[string]bool{}
	for _, t := range a.text {
		isText[t] = true
	}
	isTrain := func(i int) bool { return a.sides[a.side[i]].Role == "train" }
	trainName := ""
	for _, s := range a.sides {
		if s.Role == "train" {
			if trainName != "" {
				trainName += "+"
			}
			trainName += s.Name
		}
	}
	for hs, hside := range a.sides {
		if hside.Role != "holdout" {
			continue
		}
		var stats []shiftStat
		nT, nH := 0, 0
		for i := range a.rowID {
			if isTrain(i) {
				nT++
			} else if a.side[i] == hs {
				nH++
			}
		}
		if nT == 0 || nH == 0 {
			continue
		}
		// Each column's statistics are computed in parallel (they read the columns only);
		// findings are added in column order.
		shifts := make([]colShift, len(cols))
		eachParallel(len(cols), a.workers, func(k int) {
			col := cols[k]
			c := a.data[col]
			subject := col
			if col == a.label {
				subject = "label:" + col
			}
			st := shiftStat{Column: subject}
			var sev Severity
			var msg string
			isTime := c.Logical == "DATE" || c.Logical == "TIMESTAMP"
			if c.numeric() || isTime {
				var ref, act, refOK, actOK []float64
				for i := range a.rowID {
					v := math.NaN()
					if !c.null[i] {
						if isTime {
							if sec, ok := timeSeconds(c.str[i]); ok {
								v = sec
							}
						} else {
							v = c.num[i]
						}
					}
					if isTrain(i) {
						ref = append(ref, v)
						if !math.IsNaN(v) {
							refOK = append(refOK, v)
						}
					} else if a.side[i] == hs {
						act = append(act, v)
						if !math.IsNaN(v) {
							actOK = append(actOK, v)
						}
					}
				}
				st.Kind = "numeric"
				st.PSI = PSINumeric(ref, act)
				ks := KS2(refOK, actOK)
				st.KSD, st.KSP = finite(ks.D), finite(ks.P)
				if ks.P < alpha {
					msg = fmt.Sprintf("; KS D %.3f, p %.2g (%s)", ks.D, ks.P, ks.Method)
					if ks.D >= effect {
						sev = Warn
					} else {
						sev = Info
					}
				}
			} else {
				var ref, act []string
				var rn, an []bool
				for i := range a.rowID {
					if isTrain(i) {
						ref, rn = append(ref, c.str[i]), append(rn, c.null[i])
					} else if a.side[i] == hs {
						act, an = append(act, c.str[i]), append(an, c.null[i])
					}
				}
				levels, e, o := CategoricalCounts(ref, act, rn, an)
				if len(levels) > maxLevels || (col != a.label && len(levels) > (nT+nH)/2) || isText[col] {
					shifts[k] = colShift{skip: true} // identifier-like or free text: not a distribution of levels
					return
				}
				st.Kind, st.Levels = "categorical", len(levels)
				st.PSI = PSI(e, o)
				chi := ChiSquare([][]float64{e, o})
				st.X2, st.DF, st.ChiP, st.V = finite(chi.X2), chi.DF, finite(chi.P), finite(chi.CramersV)
				if chi.DF > 0 && chi.P < alpha {
					msg = fmt.Sprintf("; chi-square %.1f, df %d, p %.2g, Cramér's V %.3f", chi.X2, chi.DF, chi.P, chi.CramersV)
					if chi.CramersV >= effect {
						sev = Warn
					} else {
						sev = Info
					}
				}
			}
			st.PSI = finite(st.PSI)
			shifts[k] = colShift{st: st, sev: sev, msg: msg, isTime: isTime}
		})
		for k, col := range cols {
			r := shifts[k]
			if r.skip {
				continue
			}
			st, sev, msg, isTime := r.st, r.sev, r.msg, r.isTime
			subject := st.Column
			stats = append(stats, st)
			switch {
			case st.PSI >= psiErr:
				sev = Error
			case st.PSI >= psiWarn && sev != Error:
				sev = Warn
			}
			if sev == "" {
				continue
			}
			q := a.queryName(hside.Name + "." + col)
			psiExpr := "t." + quoteIdent(col)
			if isTime {
				psiExpr = "julianday(" + psiExpr + ")"
			}
			a.add(Finding{Severity: sev, Subject: subject, SideA: trainName, NA: nT, SideB: hside.Name, NB: nH, Score: st.PSI, Query: q, Evidence: map[string]any{"statistics": st},
				Message: fmt.Sprintf("%s on %s differs from training: PSI %.3f%s", subject, hside.Name, st.PSI, msg)})
			a.addQuery(Query{Name: q, Kind: "check", NeedsTool: true,
				Description: fmt.Sprintf("recomputes the PSI of %s, training rows against %s; no rows = it matches the stored score", col, hside.Name),
				SQL: fmt.Sprintf("WITH %s,\nr AS (SELECT leak_psi(%s, k.role = 'train') AS recomputed FROM k JOIN %s t ON t.ss_row = k.row_id WHERE k.role = 'train' OR k.side = %s)\nSELECT recomputed, (SELECT score FROM ss_findings WHERE audit_id = %d AND check_name = 'distribution_shift' AND subject = %s AND side_b = %s) AS stored FROM r WHERE abs(recomputed - stored) > 1e-9 OR stored IS NULL",
					a.baseCTE(), psiExpr, quoteIdent(a.table), quoteString(hside.Name), a.auditID, quoteString(subject), quoteString(hside.Name))})
		}
		worst := 0.0
		for _, s := range stats {
			worst = math.Max(worst, s.PSI)
		}
		a.add(Finding{Severity: Info, Subject: "per-column statistics", Item: hside.Name, HasItem: true, SideA: trainName, NA: nT, SideB: hside.Name, NB: nH, Score: worst,
			Evidence: map[string]any{"columns": stats},
			Message:  fmt.Sprintf("%d columns compared, training against %s; largest PSI %.3f", len(stats), hside.Name, worst)})
	}
	return nil
}
