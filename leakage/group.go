package leakage

import (
	"fmt"
	"slices"
	"sort"
	"strconv"
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

// unionFind is a disjoint-set forest over 0..n-1 with path halving; the smaller index is the
// root of a union, so roots are each set's first member.
type unionFind struct{ parent []int32 }

func newUnionFind(n int) *unionFind {
	u := &unionFind{parent: make([]int32, n)}
	for i := range u.parent {
		u.parent[i] = int32(i)
	}
	return u
}

// add makes a new singleton set and returns it.
func (u *unionFind) add() int32 {
	n := int32(len(u.parent))
	u.parent = append(u.parent, n)
	return n
}

func (u *unionFind) find(x int32) int32 {
	for u.parent[x] != x {
		u.parent[x] = u.parent[u.parent[x]]
		x = u.parent[x]
	}
	return x
}

func (u *unionFind) union(a, b int32) {
	if ra, rb := u.find(a), u.find(b); ra != rb {
		u.parent[max(ra, rb)] = min(ra, rb)
	}
}

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
	var uf unionFind
	var nodeCol []int
	var nodeVal []string
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
				n = uf.add()
				idx[j][k] = n
				nodeCol = append(nodeCol, j)
				nodeVal = append(nodeVal, k)
			}
			if first < 0 {
				first = n
				continue
			}
			uf.union(first, n)
		}
		rowNode[i] = first
	}
	// Name of each root: its smallest member (column position, value text).
	best := map[int32]int32{}
	for n := range uf.parent {
		r := uf.find(int32(n))
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
		r := uf.find(n)
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
// columns (a recursive CTE: rows reach each other through a shared value in the same
// column): the CTEs and a query of (first_row, side, item, rows) for components on more than
// one side, first_row being the component's smallest row and item its name — the smallest
// (column position, value as text) as column=value — when every entity column holds text or
// integers (named; CAST(value AS TEXT) is then the value's text), NULL otherwise.
func (a *audit) componentSQL() ([]string, string, bool) {
	var exprs, parts, names []string
	named := true
	for j, e := range a.entity {
		exprs = append(exprs, fmt.Sprintf("t.%s AS e%d", quoteIdent(e), j+1))
		parts = append(parts, fmt.Sprintf("SELECT row_id, %d AS c, e%d AS val FROM k WHERE e%d IS NOT NULL", j+1, j+1, j+1))
		names = append(names, fmt.Sprintf("WHEN %d THEN %s", j+1, quoteString(e)))
		if a.colType(e).SQLType == "REAL" {
			named = false
		}
	}
	ctes := []string{
		a.baseCTE(exprs...),
		"v(row_id, c, val) AS (" + strings.Join(parts, " UNION ALL ") + ")",
		"reach(a, b) AS (SELECT row_id, row_id FROM v UNION SELECT reach.a, v2.row_id FROM reach JOIN v v1 ON v1.row_id = reach.b JOIN v v2 ON v2.c = v1.c AND v2.val = v1.val)",
		"comp(row_id, anchor) AS (SELECT a, min(b) FROM reach GROUP BY a)",
		"cs AS (SELECT comp.anchor FROM comp JOIN k ON k.row_id = comp.row_id GROUP BY comp.anchor HAVING count(DISTINCT k.side) > 1)",
	}
	item := "NULL"
	join := ""
	if named {
		ctes = append(ctes,
			"nm AS (SELECT comp.anchor, v.c, CAST(v.val AS TEXT) AS tv FROM comp JOIN v ON v.row_id = comp.row_id)",
			"nm1 AS (SELECT anchor, min(c) AS c FROM nm GROUP BY anchor)",
			"nm2 AS (SELECT nm.anchor, (CASE nm.c "+strings.Join(names, " ")+" END) || '=' || min(nm.tv) AS item FROM nm JOIN nm1 ON nm1.anchor = nm.anchor AND nm1.c = nm.c GROUP BY nm.anchor)")
		item, join = "nm2.item", " JOIN nm2 ON nm2.anchor = comp.anchor"
	}
	recomputed := "SELECT comp.anchor, k.side, " + item + ", count(*) FROM comp JOIN k ON k.row_id = comp.row_id" + join + " WHERE comp.anchor IN (SELECT anchor FROM cs) GROUP BY comp.anchor, k.side"
	return ctes, recomputed, named
}

func runSharedEntity(a *audit) error {
	if a.entityComponents() {
		return runSharedComponents(a)
	}
	for _, col := range a.entity {
		items, total := a.sharedItems(col)
		x := "t." + quoteIdent(col)
		cte := a.baseCTE(x + " AS entity")
		named := a.colType(col).SQLType != "REAL" // CAST(value AS TEXT) is the item's text
		itemExpr := "CAST(e.entity AS TEXT)"
		if !named {
			itemExpr = "NULL"
		}
		ctes := []string{cte,
			"e AS (SELECT entity, side, count(*) AS n, min(row_id) AS m FROM k WHERE entity IS NOT NULL GROUP BY entity, side)",
			"s AS (SELECT entity, min(m) AS first_row FROM e GROUP BY entity HAVING count(*) > 1)"}
		a.addQuery(Query{Name: a.queryName(col), Kind: "check",
			Description: fmt.Sprintf("values of %s with rows on more than one side, with their first row and row count per side; no rows = the stored shared_entity items for %s (ss_finding_items) hold", col, col),
			SQL:         a.replayItemsSQL(ctes, "SELECT s.first_row, e.side, "+itemExpr+", e.n FROM e JOIN s ON s.entity = e.entity", col, named)})
		a.addQuery(Query{Name: a.queryName(col + ".rows"), Kind: "report",
			Description: fmt.Sprintf("the rows of every shared %s value the latest audit stored (row, side, value), in row order", col),
			SQL: "WITH " + cte + ",\n" + fmt.Sprintf("shared AS (SELECT DISTINCT k.entity FROM ss_finding_items i JOIN ss_findings f ON f.audit_id = i.audit_id AND f.seq = i.seq JOIN k ON k.row_id = i.first_row WHERE f.audit_id = %d AND f.check_name = %s AND f.subject = %s)\n",
				a.auditID, quoteString(a.check.Name), quoteString(col)) +
				"SELECT k.row_id, k.side, k.entity FROM k JOIN shared ON shared.entity = k.entity ORDER BY k.row_id"})
		if len(items) > 0 {
			a.add(a.sharedFinding(col, col+" values", items, total, map[string]any{}))
		}
	}
	return nil
}

// sharedFinding is the one shared_entity finding of a subject: the shared items, how many of
// the subject's total, the rows they hold per side, and the first few by name.
func (a *audit) sharedFinding(subject, what string, items []Item, total int, ev map[string]any) Finding {
	f := Finding{Severity: Error, Subject: subject, Items: items, Query: a.queryName(subject), Score: float64(len(items)) / float64(total)}
	if a.entityComponents() {
		f.Query = a.queryName("components")
	}
	per, rows := a.itemTotals(&f)
	counts := map[string]int{}
	var parts []string
	for si, n := range per {
		if n > 0 {
			counts[a.sides[si].Name] = n
			parts = append(parts, fmt.Sprintf("%d on %s", n, a.sides[si].Name))
		}
	}
	var ex []string
	for _, it := range items[:min(3, len(items))] {
		var ps []string
		for _, s := range it.Sides {
			ps = append(ps, fmt.Sprintf("%d on %s", s.N, s.Side))
		}
		ex = append(ex, fmt.Sprintf("%s (%s)", it.Name, strings.Join(ps, ", ")))
	}
	more := ""
	if len(items) > 3 {
		more = ", ..."
	}
	f.Message = fmt.Sprintf("%d of %d %s (%.1f%%) have rows on more than one side, %d rows in all: %s; e.g. %s%s",
		len(items), total, what, 100*f.Score, rows, strings.Join(parts, ", "), strings.Join(ex, "; "), more)
	ev["shared"], ev["entities"], ev["rows"], ev["rows_per_side"] = len(items), total, rows, counts
	f.Evidence = ev
	return f
}

// entityCounter counts one entity column's rows per side and value, row by row (during the
// read, on the processing goroutine, when shared_entity runs; else after it).
type entityCounter struct {
	c      *column
	ns     int
	counts []int32 // group g's rows on side s at g*ns+s
	first  []int64 // group g's first row id
	names  []string
	str    map[string]int32
	ints   map[int64]int32
	num    map[float64]int32
}

func newEntityCounter(c *column, sides, rows int) *entityCounter {
	e := &entityCounter{c: c, ns: sides}
	switch c.SQLType {
	case "TEXT":
		e.str = make(map[string]int32, rows/4+1)
	case "INTEGER":
		e.ints = make(map[int64]int32, rows/4+1)
	default:
		e.num = make(map[float64]int32, rows/4+1)
	}
	return e
}

// add counts row i (already read into the column) with its row id and side index.
func (e *entityCounter) add(i int, id int64, side int) {
	c := e.c
	if c.null[i] {
		return
	}
	var g int32
	var ok bool
	switch {
	case e.str != nil:
		if g, ok = e.str[c.str[i]]; !ok {
			g = e.group(id, c.str[i])
			e.str[c.str[i]] = g
		}
	case e.ints != nil:
		if g, ok = e.ints[c.ints[i]]; !ok {
			g = e.group(id, strconv.FormatInt(c.ints[i], 10))
			e.ints[c.ints[i]] = g
		}
	default:
		if g, ok = e.num[c.num[i]]; !ok {
			g = e.group(id, strconv.FormatFloat(c.num[i], 'g', -1, 64))
			e.num[c.num[i]] = g
		}
	}
	e.counts[int(g)*e.ns+side]++
}

func (e *entityCounter) group(id int64, name string) int32 {
	g := int32(len(e.first))
	e.first = append(e.first, id)
	e.names = append(e.names, name)
	for range e.ns {
		e.counts = append(e.counts, 0)
	}
	return g
}

// itemTotals sums f's items' rows per side (split order) and in all, and sets f's side_a /
// side_b columns to the first two sides involved.
func (a *audit) itemTotals(f *Finding) ([]int, int) {
	per := make([]int, len(a.sides))
	rows := 0
	for _, it := range f.Items {
		for _, s := range it.Sides {
			per[a.sidePos(s.Side)] += s.N
			rows += s.N
		}
	}
	for si, n := range per {
		switch {
		case n == 0:
		case f.SideA == "":
			f.SideA, f.NA = a.sides[si].Name, n
		case f.SideB == "":
			f.SideB, f.NB = a.sides[si].Name, n
		}
	}
	return per, rows
}

// sharedItems returns the values of col with rows on more than one side, in order of first
// row, and the number of distinct values, from the counts loadRows made while it read the
// rows (it counts every entity column whenever shared_entity runs on single columns).
func (a *audit) sharedItems(col string) ([]Item, int) {
	e := a.counted[col]
	return a.itemsOf(e.names, e.first, e.counts), len(e.first)
}

// itemsOf turns per-group side counts into items, keeping groups on two or more sides.
func (a *audit) itemsOf(names []string, first []int64, counts []int32) []Item {
	ns := len(a.sides)
	var items []Item
	var flat []SideRows
	for g := range first {
		cs := counts[g*ns : (g+1)*ns]
		k := 0
		for _, n := range cs {
			if n > 0 {
				k++
			}
		}
		if k < 2 {
			continue
		}
		if len(flat) < k {
			flat = make([]SideRows, 4096)
		}
		sides := flat[:0:k]
		flat = flat[k:]
		for s, n := range cs {
			if n > 0 {
				sides = append(sides, SideRows{Side: a.sides[s].Name, N: int(n)})
			}
		}
		items = append(items, Item{Name: names[g], FirstRow: first[g], Sides: sides})
	}
	return items
}

// replayItemsSQL compares recomputed (first_row, side, item, rows) with the stored items of
// this check and subject (item NULL on both when !named): no rows = agreement.
func (a *audit) replayItemsSQL(ctes []string, recomputed, subject string, named bool) string {
	item := "i.item"
	if !named {
		item = "NULL"
	}
	stored := fmt.Sprintf(`SELECT i.first_row, i.side, %s, i.rows FROM ss_finding_items i JOIN ss_findings f ON f.audit_id = i.audit_id AND f.seq = i.seq WHERE f.audit_id = %d AND f.check_name = %s AND f.subject = %s`,
		item, a.auditID, quoteString(a.check.Name), quoteString(subject))
	all := append(append([]string{}, ctes...), "recomputed(first_row, side, item, rows) AS ("+recomputed+")", "stored(first_row, side, item, rows) AS ("+stored+")")
	return "WITH " + strings.Join(all, ",\n") + "\n" +
		"SELECT 'recomputed, not stored' AS problem, first_row, side, item, rows FROM (SELECT * FROM recomputed EXCEPT SELECT * FROM stored)\n" +
		"UNION ALL SELECT 'stored, not recomputed', first_row, side, item, rows FROM (SELECT * FROM stored EXCEPT SELECT * FROM recomputed)\n" +
		"ORDER BY 2, 3"
}

// runSharedComponents is shared_entity over the connected components of the split's own
// group columns.
func runSharedComponents(a *audit) error {
	subject := a.componentSubject()
	names, groups := a.entityComponentGroups()
	ns := len(a.sides)
	first := make([]int64, len(groups))
	counts := make([]int32, len(groups)*ns)
	for g, rows := range groups {
		first[g] = a.rowID[rows[0]] // rows ascending, in row order
		for _, i := range rows {
			counts[g*ns+a.side[i]]++
		}
	}
	items := a.itemsOf(names, first, counts)
	ctes, recomputed, named := a.componentSQL()
	a.addQuery(Query{Name: a.queryName("components"), Kind: "check",
		Description: fmt.Sprintf("entities formed over %s as the split formed them (rows sharing a value in any of them are one entity) with rows on more than one side, with their first row and row count per side; no rows = the stored shared_entity items hold", strings.Join(a.entity, ", ")),
		SQL:         a.replayItemsSQL(ctes, recomputed, subject, named)})
	if len(items) > 0 {
		a.add(a.sharedFinding(subject, "entities over "+strings.Join(a.entity, ", "), items, len(groups), map[string]any{"columns": a.entity}))
	}
	return nil
}
