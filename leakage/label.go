package leakage

import (
	"fmt"
	"math"
	"sort"
)

// labelClasses returns the label's distinct non-NULL values as repr strings, sorted (numbers
// numerically), and whether the label is numeric.
func (a *audit) labelClasses() ([]string, bool) {
	c := a.data[a.label]
	seen := map[string]float64{}
	for i := range a.rowID {
		if !c.null[i] {
			if c.SQLType == "TEXT" {
				seen[c.repr(i)] = 0
			} else {
				seen[c.repr(i)] = c.num[i]
			}
		}
	}
	var out []string
	for k := range seen {
		out = append(out, k)
	}
	sort.Slice(out, func(i, j int) bool {
		if c.SQLType != "TEXT" && seen[out[i]] != seen[out[j]] {
			return seen[out[i]] < seen[out[j]]
		}
		return out[i] < out[j]
	})
	return out, c.SQLType != "TEXT"
}

// labelSQLPositive is the SQL test "label is the positive class".
func (a *audit) labelSQLPositive(pos string) string {
	c := a.data[a.label]
	l := "t." + quoteIdent(a.label)
	if c.SQLType == "TEXT" {
		return l + " = " + quoteString(pos[1:])
	}
	return l + " = " + pos[1:]
}

type leakScore struct {
	Column  string  `json:"column"`
	Measure string  `json:"measure"`
	Score   float64 `json:"score"`
	Rows    int     `json:"rows"`
	flagged bool
	query   string
	sql     string
}

func strength(s leakScore) float64 {
	if s.Measure == "spearman" {
		return math.Abs(s.Score)
	}
	return math.Abs(s.Score - 0.5)
}

func runLeakingFeature(a *audit) error {
	classes, numericLabel := a.labelClasses()
	lab := a.data[a.label]
	th, rho := a.p("auc"), a.p("rho")
	minLevel, maxLevels := int(a.p("min_level")), int(a.p("max_levels"))
	isText := map[string]bool{}
	for _, t := range a.text {
		isText[t] = true
	}
	var scores []leakScore
	binary := len(classes) == 2
	if !binary && !numericLabel {
		a.add(Finding{Severity: Info, Subject: a.label, Score: math.NaN(),
			Message: fmt.Sprintf("label %s has %d classes: single-feature AUC needs a binary label and rank correlation a numeric one; only those are computed", a.label, len(classes))})
		return nil
	}
	pos := classes[len(classes)-1]
	cte := a.baseCTE()
	for _, col := range a.feature {
		c := a.data[col]
		if col == a.timeCol {
			continue // time is examined by time_overlap and distribution_shift
		}
		var x []float64
		var y []bool
		var yn []float64
		var miss []float64
		nulls := 0
		labelled := 0
		for i := range a.rowID {
			if lab.null[i] {
				continue
			}
			labelled++
			isPos := lab.repr(i) == pos
			if c.null[i] {
				nulls++
			}
			if binary {
				miss = append(miss, b2f(!c.null[i]))
				y = append(y, isPos)
			}
			if c.null[i] || (c.numeric() && math.IsNaN(c.num[i])) {
				continue
			}
			if c.numeric() {
				x = append(x, c.num[i])
				if !binary {
					yn = append(yn, lab.num[i])
				}
			}
		}
		if binary && nulls > 0 && nulls < labelled {
			auc := AUC(miss, y)
			if !math.IsNaN(auc) {
				q := a.queryName(col + ".missing")
				scores = append(scores, leakScore{Column: col, Measure: "missingness_auc", Score: auc, Rows: labelled, flagged: auc >= th || auc <= 1-th, query: q,
					sql: fmt.Sprintf("SELECT leak_auc(t.%s IS NOT NULL, %s) AS recomputed FROM k JOIN %s t ON t.ss_row = k.row_id", quoteIdent(col), a.labelSQLPositive(pos), quoteIdent(a.table))})
			}
		}
		if isText[col] {
			continue
		}
		switch {
		case c.numeric() && binary:
			var yy []bool
			for i := range a.rowID {
				if lab.null[i] || c.null[i] || math.IsNaN(c.num[i]) {
					continue
				}
				yy = append(yy, lab.repr(i) == pos)
			}
			auc := AUC(x, yy)
			if !math.IsNaN(auc) {
				q := a.queryName(col)
				scores = append(scores, leakScore{Column: col, Measure: "auc", Score: auc, Rows: len(x), flagged: auc >= th || auc <= 1-th, query: q,
					sql: fmt.Sprintf("SELECT leak_auc(t.%s, %s) AS recomputed FROM k JOIN %s t ON t.ss_row = k.row_id", quoteIdent(col), a.labelSQLPositive(pos), quoteIdent(a.table))})
			}
		case c.numeric():
			r := Spearman(x, yn)
			if !math.IsNaN(r) {
				scores = append(scores, leakScore{Column: col, Measure: "spearman", Score: r, Rows: len(x), flagged: math.Abs(r) >= rho})
			}
		case c.text() && binary:
			// Score each row by its level's positive share (small levels pooled).
			type lv struct{ n, p int }
			levels := map[string]*lv{}
			for i := range a.rowID {
				if lab.null[i] || c.null[i] {
					continue
				}
				l := levels[c.str[i]]
				if l == nil {
					l = &lv{}
					levels[c.str[i]] = l
				}
				l.n++
				if lab.repr(i) == pos {
					l.p++
				}
			}
			if len(levels) > maxLevels || len(levels) < 2 {
				continue
			}
			var pooled lv
			for _, l := range levels {
				if l.n < minLevel {
					pooled.n += l.n
					pooled.p += l.p
				}
			}
			var sc []float64
			var yy []bool
			for i := range a.rowID {
				if lab.null[i] || c.null[i] {
					continue
				}
				l := levels[c.str[i]]
				if l.n < minLevel {
					l = &pooled
				}
				sc = append(sc, float64(l.p)/float64(l.n))
				yy = append(yy, lab.repr(i) == pos)
			}
			auc := AUC(sc, yy)
			if !math.IsNaN(auc) {
				scores = append(scores, leakScore{Column: col, Measure: "level_purity_auc", Score: auc, Rows: len(sc), flagged: auc >= th || auc <= 1-th})
			}
		}
	}
	sort.SliceStable(scores, func(i, j int) bool {
		if si, sj := strength(scores[i]), strength(scores[j]); si != sj {
			return si > sj
		}
		if scores[i].Column != scores[j].Column {
			return scores[i].Column < scores[j].Column
		}
		return scores[i].Measure < scores[j].Measure
	})
	for _, s := range scores {
		if !s.flagged {
			continue
		}
		what := map[string]string{"auc": "AUC", "missingness_auc": "AUC of being filled in", "level_purity_auc": "AUC of its levels' label shares", "spearman": "Spearman rank correlation"}[s.Measure]
		f := Finding{Severity: Error, Subject: s.Column, Item: s.Measure, HasItem: true, Score: s.Score, Query: s.query,
			Message:  fmt.Sprintf("%s alone predicts %s: %s %.3f over %d rows (recorded after the outcome? it will not exist at prediction time)", s.Column, a.label, what, s.Score, s.Rows),
			Evidence: map[string]any{"measure": s.Measure, "rows": s.Rows, "positive_class": pos[1:]}}
		a.add(f)
		if s.sql != "" {
			a.addQuery(Query{Name: s.query, Kind: "check", NeedsTool: true,
				Description: fmt.Sprintf("recomputes the %s of %s for label %s = %s; no rows = it matches the stored score", s.Measure, s.Column, a.label, pos[1:]),
				SQL: fmt.Sprintf("WITH %s,\nr AS (%s)\nSELECT recomputed, (SELECT score FROM ss_findings WHERE audit_id = %d AND check_name = 'leaking_feature' AND subject = %s AND item = %s) AS stored FROM r WHERE abs(recomputed - stored) > 1e-9 OR stored IS NULL",
					cte, s.sql, a.auditID, quoteString(s.Column), quoteString(s.Measure))})
		}
	}
	top := math.NaN()
	if len(scores) > 0 {
		top = scores[0].Score
	}
	a.add(Finding{Severity: Info, Subject: "ranking", Score: top, Evidence: map[string]any{"ranking": scores, "positive_class": pos[1:]},
		Message: fmt.Sprintf("%d single-column measures ranked by strength; strongest: %s", len(scores), topName(scores))})
	return nil
}

func topName(s []leakScore) string {
	if len(s) == 0 {
		return "none"
	}
	return fmt.Sprintf("%s (%s %.3f)", s[0].Column, s[0].Measure, s[0].Score)
}

func b2f(b bool) float64 {
	if b {
		return 1
	}
	return 0
}
