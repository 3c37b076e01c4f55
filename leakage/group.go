package leakage

import (
	"fmt"
	"slices"
	"sort"
	"strings"
)

func sortStrings(s []string) { sort.Strings(s) }

// entityGroups groups row indexes by the raw value of one column (NULLs left out), in
// order of first row; keys are repr strings, groups[k] the rows of order[k] (ascending).
func (a *audit) entityGroups(col string) ([]string, [][]int32) {
	c := a.data[col]
	n := len(a.rowID)
	gid := make([]int32, n) // group of each row, -1 for NULL
	idx := make(map[string]int32, n/8+1)
	var order []string
	var size []int32
	for i := 0; i < n; i++ {
		if c.null[i] {
			gid[i] = -1
			continue
		}
		var g int32
		var ok bool
		if c.SQLType == "TEXT" {
			g, ok = idx[c.str[i]]
			if !ok {
				g = int32(len(order))
				idx[c.str[i]] = g
				order = append(order, "t"+c.str[i])
				size = append(size, 0)
			}
		} else {
			k := c.repr(i)
			g, ok = idx[k]
			if !ok {
				g = int32(len(order))
				idx[k] = g
				order = append(order, k)
				size = append(size, 0)
			}
		}
		gid[i] = g
		size[g]++
	}
	// One array for every group's rows, cut by the counts.
	flat := make([]int32, n)
	groups := make([][]int32, len(order))
	off := int32(0)
	for g, m := range size {
		groups[g] = flat[off : off : off+m]
		off += m
	}
	for i, g := range gid {
		if g >= 0 {
			groups[g] = append(groups[g], int32(i))
		}
	}
	return order, groups
}

func itemText(repr string) string { return repr[1:] }

// entityComponents reports whether the entity columns are the split's own two or more group
// columns, which the split joined into connected components.
func (a *audit) entityComponents() bool {
	return len(a.entity) > 1 && slices.Equal(a.entity, a.groupBy)
}

// componentSubject is the finding subject of a connected-components entity: its columns.
func (a *audit) componentSubject() string { return strings.Join(a.entity, "+") }

// entityComponentGroups groups row indexes into connected components over the entity columns
// (rows sharing a non-NULL value in the same column are one component; rows NULL in every
// entity column belong to none), in order of first row. Each component's name is its first
// member value, comparing (column position, value as text), as "column=value".
func (a *audit) entityComponentGroups() ([]string, [][]int32) {
	cols := make([]*column, len(a.entity))
	idx := make([]map[string]int32, len(a.entity))
	for j, e := range a.entity {
		cols[j] = a.data[e]
		idx[j] = map[string]int32{}
	}
	var parent []int32
	var nodeCol []int
	var nodeVal []string
	find := func(x int32) int32 {
		for parent[x] != x {
			parent[x] = parent[parent[x]]
			x = parent[x]
		}
		return x
	}
	rowNode := make([]int32, len(a.rowID))
	for i := range a.rowID {
		first := int32(-1)
		for j, c := range cols {
			if c.null[i] {
				continue
			}
			k := c.repr(i)
			n, ok := idx[j][k]
			if !ok {
				n = int32(len(parent))
				idx[j][k] = n
				parent = append(parent, n)
				nodeCol = append(nodeCol, j)
				nodeVal = append(nodeVal, k)
			}
			if first < 0 {
				first = n
				continue
			}
			ra, rb := find(first), find(n)
			if ra < rb {
				parent[rb] = ra
			} else if rb < ra {
				parent[ra] = rb
			}
		}
		rowNode[i] = first
	}
	// Name of each root: its smallest member (column position, value text).
	best := map[int32]int32{}
	for n := range parent {
		r := find(int32(n))
		b, ok := best[r]
		if !ok || nodeCol[n] < nodeCol[b] || (nodeCol[n] == nodeCol[b] && itemText(nodeVal[n]) < itemText(nodeVal[b])) {
			best[r] = int32(n)
		}
	}
	comp := map[int32]int{}
	var names []string
	var groups [][]int32
	for i, n := range rowNode {
		if n < 0 {
			continue
		}
		r := find(n)
		g, ok := comp[r]
		if !ok {
			g = len(groups)
			comp[r] = g
			b := best[r]
			names = append(names, a.entity[nodeCol[b]]+"="+itemText(nodeVal[b]))
			groups = append(groups, nil)
		}
		groups[g] = append(groups[g], int32(i))
	}
	return names, groups
}

// componentSQL is the stock-SQL recomputation of connected components over the entity
// columns: the (row, anchor) pairs, anchor being the component's smallest row, for
// components on more than one side (a recursive CTE: rows reach each other through a shared
// value in the same column).
func (a *audit) componentSQL() ([]string, string) {
	var exprs, parts []string
	for j, e := range a.entity {
		exprs = append(exprs, fmt.Sprintf("t.%s AS e%d", quoteIdent(e), j+1))
		parts = append(parts, fmt.Sprintf("SELECT row_id, %d AS c, e%d AS val FROM k WHERE e%d IS NOT NULL", j+1, j+1, j+1))
	}
	ctes := []string{
		a.baseCTE(exprs...),
		"v(row_id, c, val) AS (" + strings.Join(parts, " UNION ALL ") + ")",
		"reach(a, b) AS (SELECT row_id, row_id FROM v UNION SELECT reach.a, v2.row_id FROM reach JOIN v v1 ON v1.row_id = reach.b JOIN v v2 ON v2.c = v1.c AND v2.val = v1.val)",
		"comp(row_id, anchor) AS (SELECT a, min(b) FROM reach GROUP BY a)",
	}
	recomputed := `SELECT comp.row_id, k.side, comp.anchor FROM comp JOIN k ON k.row_id = comp.row_id WHERE comp.anchor IN (SELECT c2.anchor FROM comp c2 JOIN k k2 ON k2.row_id = c2.row_id GROUP BY c2.anchor HAVING count(DISTINCT k2.side) > 1)`
	return ctes, recomputed
}

func runSharedEntity(a *audit) error {
	if a.entityComponents() {
		return runSharedComponents(a)
	}
	for _, col := range a.entity {
		order, groups := a.entityGroups(col)
		n, rows := 0, 0
		for gi, k := range order {
			g := groups[gi]
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

// runSharedComponents is shared_entity over the connected components of the split's own
// group columns.
func runSharedComponents(a *audit) error {
	subject := a.componentSubject()
	names, groups := a.entityComponentGroups()
	n, rows := 0, 0
	for k, g := range groups {
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
		a.add(Finding{Severity: Error, Subject: subject, Item: names[k], HasItem: true, Sides: s, Score: float64(len(s)), Query: a.queryName("components"),
			Message:  fmt.Sprintf("entity %s (linked over %s) has rows on %d sides: %s", names[k], strings.Join(a.entity, ", "), len(s), sideSummary(s)),
			Evidence: map[string]any{"rows_per_side": counts, "columns": a.entity}})
	}
	ctes, recomputed := a.componentSQL()
	a.addQuery(Query{Name: a.queryName("components"), Kind: "check",
		Description: fmt.Sprintf("entities formed over %s as the split formed them (rows sharing a value in any of them are one entity) with rows on more than one side; no rows = the stored shared_entity findings hold", strings.Join(a.entity, ", ")),
		SQL:         a.replaySQL(ctes, recomputed, subject)})
	if n > 0 {
		a.add(Finding{Severity: Info, Subject: subject, Item: "summary", HasItem: true, Score: float64(n) / float64(len(groups)),
			Message:  fmt.Sprintf("%d of %d entities over %s (%.1f%%) have rows on more than one side, %d rows in all", n, len(groups), strings.Join(a.entity, ", "), 100*float64(n)/float64(len(groups)), rows),
			Evidence: map[string]any{"shared": n, "entities": len(groups), "rows": rows}})
	}
	return nil
}
