package leakage

import (
	"fmt"
	"sort"
)

func sortStrings(s []string) { sort.Strings(s) }

// entityGroups groups row indexes by the raw value of one column (NULLs left out), in
// order of first row; keys are repr strings.
func (a *audit) entityGroups(col string) ([]string, map[string][]int32) {
	c := a.data[col]
	groups := map[string][]int32{}
	var order []string
	switch c.SQLType {
	case "TEXT":
		idx := map[string]int32{}
		var members [][]int32
		for i := range a.rowID {
			if c.null[i] {
				continue
			}
			g, ok := idx[c.str[i]]
			if !ok {
				g = int32(len(members))
				idx[c.str[i]] = g
				members = append(members, nil)
				order = append(order, "t"+c.str[i])
			}
			members[g] = append(members[g], int32(i))
		}
		for k, m := range members {
			groups[order[k]] = m
		}
	default:
		for i := range a.rowID {
			if c.null[i] {
				continue
			}
			k := c.repr(i)
			if _, ok := groups[k]; !ok {
				order = append(order, k)
			}
			groups[k] = append(groups[k], int32(i))
		}
	}
	return order, groups
}

func itemText(repr string) string { return repr[1:] }

func runSharedEntity(a *audit) error {
	for _, col := range a.entity {
		order, groups := a.entityGroups(col)
		n, rows := 0, 0
		for _, k := range order {
			g := groups[k]
			if a.distinctSides(g) < 2 {
				continue
			}
			n++
			rows += len(g)
			s := a.groupSides(g)
			counts := map[string]int{}
			for _, x := range s {
				counts[x.Side] = len(x.Rows)
			}
			a.add(Finding{Severity: Error, Subject: col, Item: itemText(k), HasItem: true, Sides: s, Score: float64(len(s)), Query: a.queryName(col),
				Message:  fmt.Sprintf("%s %s has rows on %d sides: %s", col, itemText(k), len(s), sideSummary(s)),
				Evidence: map[string]any{"rows_per_side": counts}})
		}
		x := "t." + quoteIdent(col)
		cte := a.baseCTE(x + " AS entity")
		a.addQuery(Query{Name: a.queryName(col), Kind: "check",
			Description: fmt.Sprintf("values of %s with rows on more than one side; no rows = the stored shared_entity findings for %s hold", col, col),
			SQL:         a.replaySQL([]string{cte}, `SELECT row_id, side, min(row_id) OVER (PARTITION BY entity) FROM k WHERE entity IN (SELECT entity FROM k WHERE entity IS NOT NULL GROUP BY entity HAVING count(DISTINCT side) > 1)`, col)})
		if n > 0 {
			a.add(Finding{Severity: Info, Subject: col, Item: "summary", HasItem: true, Score: float64(n) / float64(len(order)),
				Message:  fmt.Sprintf("%d of %d %s values (%.1f%%) have rows on more than one side, %d rows in all", n, len(order), col, 100*float64(n)/float64(len(order)), rows),
				Evidence: map[string]any{"shared": n, "entities": len(order), "rows": rows}})
		}
	}
	return nil
}
