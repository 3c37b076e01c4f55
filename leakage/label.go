package leakage

import (
	"fmt"
	"math"
	"slices"
	"sort"
)

// labelClasses returns the label's distinct non-NULL values as repr strings, sorted (numbers
// numerically), whether the label is numeric, and each row's class as its index in that
// order (-1 for NULL), all from one pass over the rows.
func (a *audit) labelClasses() ([]string, bool, []int32) {
	c := a.data[a.label]
	type class struct {
		id  int32 // in order of first row
		num float64
	}
	seen := map[string]class{}
	idx := make([]int32, len(a.rowID))
	for i := range a.rowID {
		idx[i] = -1
		if c.null[i] {
			continue
		}
		r := c.repr(i)
		k, ok := seen[r]
		if !ok {
			k = class{int32(len(seen)), 0}
			if c.SQLType != "TEXT" {
				k.num = c.num[i]
			}
			seen[r] = k
		}
		idx[i] = k.id
	}
	var out []string
	for k := range seen {
		out = append(out, k)
	}
	sort.Slice(out, func(i, j int) bool {
		if c.SQLType != "TEXT" && seen[out[i]].num != seen[out[j]].num {
			return seen[out[i]].num < seen[out[j]].num
		}
		return out[i] < out[j]
	})
	rank := make([]int32, len(out)) // first-row id -> sorted position
	for p, k := range out {
		rank[seen[k].id] = int32(p)
	}
	for i, id := range idx {
		if id >= 0 {
			idx[i] = rank[id]
		}
	}
	return out, c.SQLType != "TEXT", idx
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
	Class   string  `json:"class,omitempty"` // the class scored against the rest (a label with classes)
	flagged bool
	query   string
	sql     string
	pos     string // repr of the positive class
}

func strength(s leakScore) float64 {
	if s.Measure == "spearman" {
		return math.Abs(s.Score)
	}
	return math.Abs(s.Score - 0.5)
}

// runLeakingFeature scores every feature on its own. A binary label is scored with its
// larger class as positive; a label of three or more classes (text) one class against the
// rest, keeping per column and measure the class it separates best; a numeric label of more
// than two values by rank correlation.
func runLeakingFeature(a *audit) error {
	classes, numericLabel, labelIdx := a.labelClasses()
	th, rho := a.p("auc"), a.p("rho")
	maxLevels := int(a.p("max_levels"))
	binary := len(classes) == 2
	var positives []string
	switch {
	case binary:
		positives = classes[len(classes)-1:]
	case !numericLabel && len(classes) > maxLevels:
		a.add(Finding{Severity: Info, Subject: a.label, Score: math.NaN(),
			Message: fmt.Sprintf("label %s has %d classes, more than max_levels %d: no single-column measures computed", a.label, len(classes), maxLevels)})
		return nil
	case !numericLabel:
		positives = classes
	}
	isText := map[string]bool{}
	for _, t := range a.text {
		isText[t] = true
	}
	// Columns are scored in parallel (they read the columns only), collected in column order.
	perCol := make([][]leakScore, len(a.feature))
	eachParallel(len(a.feature), a.workers, func(k int) {
		col := a.feature[k]
		if col == a.timeCol {
			return // time is examined by time_overlap and distribution_shift
		}
		if positives == nil {
			if s, ok := a.spearmanScore(col, rho); ok && !isText[col] {
				perCol[k] = []leakScore{s}
			}
			return
		}
		best := map[string]leakScore{}
		var order []string
		for _, pos := range positives {
			for _, s := range a.classScores(col, pos, slices.Index(classes, pos), labelIdx, th, isText[col]) {
				if !binary {
					s.Class = pos[1:]
				}
				b, ok := best[s.Measure]
				if !ok {
					order = append(order, s.Measure)
				}
				if !ok || strength(s) > strength(b) {
					best[s.Measure] = s
				}
			}
		}
		for _, m := range order {
			perCol[k] = append(perCol[k], best[m])
		}
	})
	var scores []leakScore
	for _, s := range perCol {
		scores = append(scores, s...)
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
	cte := a.baseCTE()
	for _, s := range scores {
		if !s.flagged {
			continue
		}
		what := map[string]string{"auc": "AUC", "missingness_auc": "AUC of being filled in", "level_purity_auc": "AUC of its levels' label shares", "spearman": "Spearman rank correlation"}[s.Measure]
		target := a.label
		ev := map[string]any{"measure": s.Measure, "rows": s.Rows}
		if s.pos != "" {
			ev["positive_class"] = s.pos[1:]
		}
		if s.Class != "" {
			target = fmt.Sprintf("%s = %s (one class against the other %d)", a.label, s.Class, len(classes)-1)
		}
		f := Finding{Severity: Error, Subject: s.Column, Item: s.Measure, HasItem: true, Score: s.Score, Query: s.query,
			Message:  fmt.Sprintf("%s alone predicts %s: %s %.3f over %d rows (recorded after the outcome? it will not exist at prediction time)", s.Column, target, what, s.Score, s.Rows),
			Evidence: ev}
		a.add(f)
		if s.sql != "" {
			a.addQuery(Query{Name: s.query, Kind: "check", NeedsTool: true,
				Description: fmt.Sprintf("recomputes the %s of %s for label %s = %s; no rows = it matches the stored score", s.Measure, s.Column, a.label, s.pos[1:]),
				SQL: fmt.Sprintf("WITH %s,\nr AS (%s)\nSELECT recomputed, (SELECT score FROM ss_findings WHERE audit_id = %d AND check_name = 'leaking_feature' AND subject = %s AND item = %s) AS stored FROM r WHERE abs(recomputed - stored) > 1e-9 OR stored IS NULL",
					cte, s.sql, a.auditID, quoteString(s.Column), quoteString(s.Measure))})
		}
	}
	top := math.NaN()
	if len(scores) > 0 {
		top = scores[0].Score
	}
	ev := map[string]any{"ranking": scores}
	if binary {
		ev["positive_class"] = positives[0][1:]
	} else if positives != nil {
		ev["classes"] = len(classes)
	}
	a.add(Finding{Severity: Info, Subject: "ranking", Score: top, Evidence: ev,
		Message: fmt.Sprintf("%d single-column measures ranked by strength; strongest: %s", len(scores), topName(scores))})
	return nil
}

// spearmanScore is a numeric column's rank correlation with a numeric label.
func (a *audit) spearmanScore(col string, rho float64) (leakScore, bool) {
	c, lab := a.data[col], a.data[a.label]
	if !c.numeric() {
		return leakScore{}, false
	}
	var x, y []float64
	for i := range a.rowID {
		if lab.null[i] || c.null[i] || math.IsNaN(c.num[i]) {
			continue
		}
		x = append(x, c.num[i])
		y = append(y, lab.num[i])
	}
	r := Spearman(x, y)
	if math.IsNaN(r) {
		return leakScore{}, false
	}
	return leakScore{Column: col, Measure: "spearman", Score: r, Rows: len(x), flagged: math.Abs(r) >= rho}, true
}

// classScores are col's measures with pos (a label repr) as the positive class and every
// other labelled row as negative: missingness AUC, and a numeric column's AUC or a
// categorical column's level-purity AUC (not for text columns).
func (a *audit) classScores(col, pos string, posIdx int, labelIdx []int32, th float64, text bool) []leakScore {
	c, lab := a.data[col], a.data[a.label]
	minLevel, maxLevels := int(a.p("min_level")), int(a.p("max_levels"))
	var out []leakScore
	var x, miss []float64
	var y, ym []bool
	nulls, labelled := 0, 0
	for i := range a.rowID {
		if lab.null[i] {
			continue
		}
		labelled++
		isPos := int(labelIdx[i]) == posIdx
		if c.null[i] {
			nulls++
		}
		miss = append(miss, b2f(!c.null[i]))
		ym = append(ym, isPos)
		if c.null[i] || (c.numeric() && math.IsNaN(c.num[i])) {
			continue
		}
		if c.numeric() {
			x = append(x, c.num[i])
			y = append(y, isPos)
		}
	}
	if nulls > 0 && nulls < labelled {
		if auc := AUC(miss, ym); !math.IsNaN(auc) {
			out = append(out, leakScore{Column: col, Measure: "missingness_auc", Score: auc, Rows: labelled, flagged: auc >= th || auc <= 1-th, query: a.queryName(col + ".missing"), pos: pos,
				sql: fmt.Sprintf("SELECT leak_auc(t.%s IS NOT NULL, %s) AS recomputed FROM k JOIN %s t ON t.ss_row = k.row_id", quoteIdent(col), a.labelSQLPositive(pos), quoteIdent(a.table))})
		}
	}
	if text {
		return out
	}
	switch {
	case c.numeric():
		if auc := AUC(x, y); !math.IsNaN(auc) {
			out = append(out, leakScore{Column: col, Measure: "auc", Score: auc, Rows: len(x), flagged: auc >= th || auc <= 1-th, query: a.queryName(col), pos: pos,
				sql: fmt.Sprintf("SELECT leak_auc(t.%s, %s) AS recomputed FROM k JOIN %s t ON t.ss_row = k.row_id", quoteIdent(col), a.labelSQLPositive(pos), quoteIdent(a.table))})
		}
	case c.text():
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
			if int(labelIdx[i]) == posIdx {
				l.p++
			}
		}
		if len(levels) > maxLevels || len(levels) < 2 {
			return out
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
			yy = append(yy, int(labelIdx[i]) == posIdx)
		}
		if auc := AUC(sc, yy); !math.IsNaN(auc) {
			out = append(out, leakScore{Column: col, Measure: "level_purity_auc", Score: auc, Rows: len(sc), flagged: auc >= th || auc <= 1-th, pos: pos})
		}
	}
	return out
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
