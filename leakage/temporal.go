package leakage

import (
	"fmt"
	"math"
	"strconv"

	"splitsmith/splits"
)

// timeVal compares times the way SQLite compares the stored values: TEXT bytewise, numbers
// numerically.
type timeVal struct {
	s string
	f float64
}

func (a *audit) timeAt(c *column, i int) (timeVal, bool) {
	if c.null[i] {
		return timeVal{}, false
	}
	if c.SQLType == "TEXT" {
		return timeVal{s: c.str[i]}, true
	}
	return timeVal{f: c.num[i]}, !math.IsNaN(c.num[i])
}

func (t timeVal) less(u timeVal, text bool) bool {
	if text {
		return t.s < u.s
	}
	return t.f < u.f
}

func (t timeVal) String() string {
	if t.s != "" {
		return t.s
	}
	return strconv.FormatFloat(t.f, 'g', -1, 64)
}

// timeSeconds reads a stored DATE or TIMESTAMP text as the split does (splits.ParseTimeText:
// Unix seconds, a value without a zone read as UTC).
func timeSeconds(s string) (float64, bool) { return splits.ParseTimeText(s) }

func runTimeOverlap(a *audit) error {
	c := a.data[a.timeCol]
	text := c.SQLType == "TEXT"
	var hStart, tEnd timeVal
	hasH, hasT := false, false
	for i := range a.rowID {
		t, ok := a.timeAt(c, i)
		if !ok {
			continue
		}
		switch a.sides[a.side[i]].Role {
		case "holdout":
			if !hasH || t.less(hStart, text) {
				hStart, hasH = t, true
			}
		case "train":
			if !hasT || tEnd.less(t, text) {
				tEnd, hasT = t, true
			}
		}
	}
	tm := "t." + quoteIdent(a.timeCol)
	if !hasH || !hasT {
		a.add(Finding{Severity: Info, Subject: "holdout period", Score: math.NaN(),
			Message: fmt.Sprintf("no comparison: the split has no %s rows with a %s value", map[bool]string{true: "training", false: "holdout"}[hasH], a.timeCol)})
		return nil
	}
	// (a) training rows later than the holdout's start.
	var late []int32
	for i := range a.rowID {
		if a.sides[a.side[i]].Role != "train" {
			continue
		}
		if t, ok := a.timeAt(c, i); ok && hStart.less(t, text) {
			late = append(late, int32(i))
		}
	}
	ntrain := 0
	for i := range a.rowID {
		if a.sides[a.side[i]].Role == "train" {
			ntrain++
		}
	}
	if len(late) > 0 {
		s := a.groupSides(late)
		a.add(Finding{Severity: Error, Subject: "train after holdout start", Sides: s, Score: float64(len(late)) / float64(ntrain), Query: a.queryName("late_train"),
			Message:  fmt.Sprintf("%d training rows (%.1f%%) are later than the holdout's first %s %s (latest training time %s)", len(late), 100*float64(len(late))/float64(ntrain), a.timeCol, hStart, tEnd),
			Evidence: map[string]any{"holdout_start": hStart.String(), "train_end": tEnd.String()}})
	}
	cte := a.baseCTE(tm + " AS tm")
	a.addQuery(Query{Name: a.queryName("late_train"), Kind: "check",
		Description: fmt.Sprintf("training rows whose %s is later than the earliest holdout %s; no rows = the stored finding holds", a.timeCol, a.timeCol),
		SQL:         a.replaySQL([]string{cte}, `SELECT row_id, side, min(row_id) OVER () FROM k WHERE role = 'train' AND tm > (SELECT min(tm) FROM k WHERE role = 'holdout')`, "train after holdout start")})
	// (b) entities whose histories interleave across sides.
	for _, col := range a.entity {
		order, groups := a.entityGroups(col)
		for gi, key := range order {
			g := groups[gi]
			var tmax, hmin timeVal
			ht, hh := false, false
			var rows []int32
			for _, i := range g {
				t, ok := a.timeAt(c, int(i))
				if !ok {
					continue
				}
				switch a.sides[a.side[i]].Role {
				case "train":
					rows = append(rows, i)
					if !ht || tmax.less(t, text) {
						tmax, ht = t, true
					}
				case "holdout":
					rows = append(rows, i)
					if !hh || t.less(hmin, text) {
						hmin, hh = t, true
					}
				}
			}
			if ht && hh && hmin.less(tmax, text) {
				s := a.groupSides(rows)
				a.add(Finding{Severity: Warn, Subject: col, Item: itemText(key), HasItem: true, Sides: s, Score: math.NaN(), Query: a.queryName(col),
					Message:  fmt.Sprintf("%s %s: training rows up to %s but holdout rows from %s (histories interleave)", col, itemText(key), tmax, hmin),
					Evidence: map[string]any{"train_max": tmax.String(), "holdout_min": hmin.String()}})
			}
		}
		ecte := a.baseCTE(tm+" AS tm", "t."+quoteIdent(col)+" AS entity")
		a.addQuery(Query{Name: a.queryName(col), Kind: "check",
			Description: fmt.Sprintf("values of %s whose latest training %s is later than their earliest holdout %s; no rows = the stored findings hold", col, a.timeCol, a.timeCol),
			SQL: a.replaySQL([]string{ecte, `e AS (SELECT entity FROM k WHERE entity IS NOT NULL AND tm IS NOT NULL GROUP BY entity HAVING max(CASE WHEN role = 'train' THEN tm END) > min(CASE WHEN role = 'holdout' THEN tm END))`},
				`SELECT row_id, side, min(row_id) OVER (PARTITION BY entity) FROM k WHERE tm IS NOT NULL AND role IN ('train', 'holdout') AND entity IN (SELECT entity FROM e)`, col)})
	}
	// (c) the gap the spec asked for.
	if a.gap != "" {
		want, err := splits.ParseGap(a.gap, !text)
		if err != nil {
			return err
		}
		var got float64
		var unit string
		if text {
			t1, ok1 := timeSeconds(tEnd.s)
			t2, ok2 := timeSeconds(hStart.s)
			if !ok1 || !ok2 {
				return nil
			}
			got, unit = t2-t1, "seconds"
		} else {
			got, unit = hStart.f-tEnd.f, "units"
		}
		if got < want {
			a.add(Finding{Severity: Error, Subject: "gap", Score: got,
				Message:  fmt.Sprintf("the gap between the last training %s (%s) and the first holdout %s (%s) is %g %s, shorter than the spec's gap %s", a.timeCol, tEnd, a.timeCol, hStart, got, unit, a.gap),
				Evidence: map[string]any{"gap": a.gap, "gap_" + unit: want, "actual_" + unit: got}, Query: a.queryName("gap")})
		}
		expr := `(SELECT min(tm) FROM k WHERE role = 'holdout') - (SELECT max(tm) FROM k WHERE role = 'train')`
		if text {
			expr = `(julianday((SELECT min(tm) FROM k WHERE role = 'holdout')) - julianday((SELECT max(tm) FROM k WHERE role = 'train'))) * 86400`
		}
		a.addQuery(Query{Name: a.queryName("gap"), Kind: "report",
			Description: fmt.Sprintf("the actual gap (%s) between the last training and the first holdout %s; the spec asked for %s", unit, a.timeCol, a.gap),
			SQL:         "WITH " + cte + "\nSELECT " + expr + " AS actual_gap"})
	}
	return nil
}
