package leakage

import (
	"fmt"
	"math"
	"strconv"
	"strings"

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
	// (b) entities whose histories interleave across sides: one finding per entity column,
	// each such entity an item (its first row and its timed rows per side).
	ns := len(a.sides)
	for _, col := range a.entity {
		order, groups := a.entityGroups(col)
		var names, ex []string
		var first []int64
		var counts []int32
		both := 0
		for gi, key := range order {
			var tmax, hmin timeVal
			ht, hh := false, false
			var rows []int32
			for _, i := range groups[gi] {
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
			if !ht || !hh {
				continue
			}
			both++
			if !hmin.less(tmax, text) {
				continue
			}
			names = append(names, itemText(key))
			first = append(first, a.rowID[rows[0]]) // group rows ascend, in row order
			base := len(counts)
			counts = append(counts, make([]int32, ns)...)
			for _, i := range rows {
				counts[base+a.side[i]]++
			}
			if len(ex) < 3 {
				ex = append(ex, fmt.Sprintf("%s (training up to %s, holdout from %s)", itemText(key), tmax, hmin))
			}
		}
		items := a.itemsOf(names, first, counts)
		named := a.colType(col).SQLType != "REAL"
		itemExpr := "CAST(c.entity AS TEXT)"
		if !named {
			itemExpr = "NULL"
		}
		ecte := a.baseCTE(tm+" AS tm", "t."+quoteIdent(col)+" AS entity")
		interleaved := `e AS (SELECT entity, max(CASE WHEN role = 'train' THEN tm END) AS train_max, min(CASE WHEN role = 'holdout' THEN tm END) AS holdout_min FROM k WHERE entity IS NOT NULL AND tm IS NOT NULL GROUP BY entity HAVING train_max > holdout_min)`
		a.addQuery(Query{Name: a.queryName(col), Kind: "check",
			Description: fmt.Sprintf("values of %s whose latest training %s is later than their earliest holdout %s, with their first row and timed rows per side; no rows = the stored items hold", col, a.timeCol, a.timeCol),
			SQL: a.replayItemsSQL([]string{ecte, interleaved,
				`c AS (SELECT entity, side, count(*) AS n, min(row_id) AS m FROM k WHERE tm IS NOT NULL AND role IN ('train', 'holdout') AND entity IN (SELECT entity FROM e) GROUP BY entity, side)`,
				`f AS (SELECT entity, min(m) AS first_row FROM c GROUP BY entity)`},
				"SELECT f.first_row, c.side, "+itemExpr+", c.n FROM c JOIN f ON f.entity = c.entity", col, named)})
		a.addQuery(Query{Name: a.queryName(col + ".times"), Kind: "report",
			Description: fmt.Sprintf("each value of %s whose histories interleave: its latest training and earliest holdout %s", col, a.timeCol),
			SQL:         "WITH " + ecte + ",\n" + interleaved + "\nSELECT entity, train_max, holdout_min FROM e ORDER BY entity"})
		if len(items) == 0 {
			continue
		}
		f := Finding{Severity: Warn, Subject: col, Items: items, Score: float64(len(items)) / float64(both), Query: a.queryName(col)}
		_, rows := a.itemTotals(&f)
		more := ""
		if len(items) > len(ex) {
			more = ", ..."
		}
		f.Message = fmt.Sprintf("%d of %d %s values with rows on both training and holdout sides (%.1f%%) have training rows later than their first holdout row (histories interleave), %d rows; e.g. %s%s",
			len(items), both, col, 100*f.Score, rows, strings.Join(ex, "; "), more)
		f.Evidence = map[string]any{"interleaved": len(items), "entities_on_both": both, "rows": rows, "examples": ex}
		a.add(f)
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
