package leakage

import (
	"fmt"
	"math"
	"math/bits"
	"slices"
	"strconv"
	"strings"
)

// near_duplicate_numeric with tol > 0: rows on different sides are near duplicates when their
// text features are equal once normalised, their NULLs are in the same numeric columns, and
// every numeric feature agrees within the relative tolerance
//
//	|x − y| ≤ tol · max(|x|, |y|)
//
// (so zero matches only zero, and signs must agree), without being exact duplicates. Pairs
// are linked into groups (connected components), reported like the rounding mode's groups.
//
// The search never compares all pairs. Rows are first collapsed to one representative per
// exact key. For x, y of one sign the condition is |ln|x| − ln|y|| ≤ δ = −ln(1 − tol), so two
// matching values lie in the same or adjacent cells of width δ on the log scale: each
// representative is indexed under (text and NULL pattern, cells of up to three of the most
// selective numeric columns) and looks up the neighbouring cells; every candidate is
// confirmed with the condition itself on all columns. Recall is complete by construction.

// tolCompareBudget bounds the candidate confirmations (a data set of near-identical values
// could otherwise make them quadratic); over it the check stops with an info finding.
var tolCompareBudget = 200_000_000

func runNearNumericTol(a *audit, tol float64) error {
	exact := a.featureKey()
	k1 := a.keys(exact)
	var texts, nums []*column
	var textNames, numNames []string
	for _, f := range a.feature {
		if c := a.data[f]; c.SQLType == "TEXT" {
			texts = append(texts, c)
			textNames = append(textNames, f)
		} else {
			nums = append(nums, c)
			numNames = append(numNames, f)
		}
	}
	val := func(c *column, i int) float64 {
		if c.SQLType == "INTEGER" {
			return float64(c.ints[i])
		}
		return c.num[i]
	}
	isNull := func(c *column, i int) bool { return c.null[i] || (c.SQLType == "REAL" && math.IsNaN(c.num[i])) }

	// Representatives: the first row of each exact key, all its rows, and its sides.
	repOf := map[uint64]int32{}
	var rep []int32
	var members [][]int32
	var sides []uint64
	for i, k := range k1 {
		r, ok := repOf[k]
		if !ok {
			r = int32(len(rep))
			repOf[k] = r
			rep = append(rep, int32(i))
			members = append(members, nil)
			sides = append(sides, 0)
		}
		members[r] = append(members[r], int32(i))
		sides[r] |= 1 << uint(a.side[i])
	}
	n := len(rep)

	// Block: the normalised text (the exact-duplicate key over the text columns alone), then
	// the NULL and sign pattern of the numbers; cells on the log scale.
	textKey := a.keys(keySpec{cols: textNames, normalize: true})
	delta := -math.Log1p(-tol)
	const noCell = math.MinInt64 // NULL or zero: matches only the same
	block := make([]uint64, n)
	cells := make([][]int64, len(nums))
	for j := range nums {
		cells[j] = make([]int64, n)
	}
	for r, i := range rep {
		h := textKey[i]
		for j, c := range nums {
			var tag byte
			cells[j][r] = noCell
			if !isNull(c, int(i)) {
				x := val(c, int(i))
				switch {
				case x > 0:
					tag = '+'
				case x < 0:
					tag = '-'
				default:
					tag = '0'
				}
				if x != 0 {
					cells[j][r] = int64(math.Floor(math.Log(math.Abs(x)) / delta))
				}
			}
			h = (h ^ uint64(tag)) * fnvPrime
		}
		block[r] = h
	}
	cellKey := func(b uint64, cs []int64) uint64 {
		h := b
		for _, c := range cs {
			h = (h ^ uint64(c)) * fnvPrime
			h = (h ^ uint64(c)>>32) * fnvPrime
		}
		return h
	}
	// Grid columns: of the numeric columns with the most distinct cells, the first k (up to
	// three) for which the estimated cost per representative is least: probes(k) map lookups
	// (2, 5, 14: the half-space of 3^k cells), each meeting crowd(k) others to confirm, with
	// crowd the mean cell size a representative sees (the sum of squared cell sizes over the
	// rows), estimated without bias from a sample at rate q as (Σc² − (1−q)·Σc) / q² / n.
	// Costs measured on this machine (1M rows, with and without text blocking): a lookup
	// about 50 ns, a confirmation about 150 ns (its row's values are cache misses).
	const sample = 200_000
	type sel struct{ j, distinct int }
	var sels []sel
	for j := range nums {
		seen := map[int64]bool{}
		for r := 0; r < n && r < sample; r++ {
			seen[cells[j][r]] = true
		}
		sels = append(sels, sel{j, len(seen)})
	}
	slices.SortStableFunc(sels, func(x, y sel) int { return y.distinct - x.distinct })
	var grid []int
	bestK, bestCost := 0, math.Inf(1)
	m := min(n, sample)
	for k := 1; k <= min(3, len(sels)); k++ {
		size := map[uint64]int{}
		cs := make([]int64, k)
		for r := 0; r < m; r++ {
			for g := 0; g < k; g++ {
				cs[g] = cells[sels[g].j][r]
			}
			size[cellKey(block[r], cs)]++
		}
		sq := 0.0
		for _, c := range size {
			sq += float64(c) * float64(c)
		}
		q := float64(m) / float64(n)
		crowd := (sq - (1-q)*float64(m)) / (q * q) / float64(n)
		if cost := []float64{2, 5, 14}[k-1] * (50 + 150*crowd); cost < bestCost {
			bestK, bestCost = k, cost
		}
	}
	for _, s := range sels[:bestK] {
		grid = append(grid, s.j)
	}
	// The index: representatives sorted by cell key (ties by representative), and each key's
	// first position in that order (a flat layout: one map entry per cell, no slice each).
	type kr struct {
		k uint64
		r int32
	}
	byCell := make([]kr, n)
	cs := make([]int64, len(grid))
	for r := 0; r < n; r++ {
		for g, j := range grid {
			cs[g] = cells[j][r]
		}
		byCell[r] = kr{cellKey(block[r], cs), int32(r)}
	}
	slices.SortFunc(byCell, func(x, y kr) int {
		if x.k != y.k {
			return cmpU64(x.k, y.k)
		}
		return int(x.r - y.r)
	})
	start := make(map[uint64]int32, n/2+1)
	for i := len(byCell) - 1; i >= 0; i-- {
		start[byCell[i].k] = int32(i)
	}
	bucket := func(k uint64) []kr {
		i, ok := start[k]
		if !ok {
			return nil
		}
		j := int(i)
		for j < len(byCell) && byCell[j].k == k {
			j++
		}
		return byCell[i:j]
	}

	match := func(p, q int32) bool {
		i, k := int(rep[p]), int(rep[q])
		for _, c := range texts {
			if c.null[i] != c.null[k] || (!c.null[i] && NormalizeValue(c.str[i]) != NormalizeValue(c.str[k])) {
				return false
			}
		}
		for _, c := range nums {
			ni, nk := isNull(c, i), isNull(c, k)
			if ni || nk {
				if ni != nk {
					return false
				}
				continue
			}
			x, y := val(c, i), val(c, k)
			var d float64
			if c.SQLType == "INTEGER" {
				d = math.Abs(float64(c.ints[i] - c.ints[k])) // SQLite subtracts integers exactly
			} else {
				d = math.Abs(x - y)
			}
			if !(d <= tol*math.Max(math.Abs(x), math.Abs(y))) {
				return false
			}
		}
		return true
	}

	uf := newUnionFind(n)
	// Each pair is found once: a representative looks at the neighbouring cells whose offset
	// is lexicographically at least zero (the other half sees it from the other end), and in
	// its own cell only at later representatives.
	compares := 0
	probe := make([]int64, len(grid))
	var walk func(g int, p int32, ahead bool) bool
	walk = func(g int, p int32, ahead bool) bool {
		if g == len(grid) {
			for _, e := range bucket(cellKey(block[p], probe)) {
				q := e.r
				if (!ahead && q <= p) || block[q] != block[p] || bits.OnesCount64(sides[p]|sides[q]) < 2 {
					continue
				}
				if compares++; compares > tolCompareBudget {
					return false
				}
				if match(p, q) {
					uf.union(p, q)
				}
			}
			return true
		}
		c := cells[grid[g]][p]
		if c == noCell {
			probe[g] = c
			return walk(g+1, p, ahead)
		}
		for d := int64(-1); d <= 1; d++ {
			if !ahead && d < 0 {
				continue // the pair is seen from the other representative
			}
			probe[g] = c + d
			if !walk(g+1, p, ahead || d > 0) {
				return false
			}
		}
		return true
	}
	for p := int32(0); int(p) < n; p++ {
		if !walk(0, p, false) {
			a.add(Finding{Severity: Info, Subject: "across sides", Score: tol,
				Message:  fmt.Sprintf("tolerance search stopped after %d candidate pairs (more than the budget): the numeric values are too alike for tol %g; use the rounding mode (tol=0, digits) instead", tolCompareBudget, tol),
				Evidence: map[string]any{"tol": tol, "budget": tolCompareBudget}})
			return nil
		}
	}

	// Groups of two or more representatives, in order of first row.
	comp := map[int32][]int32{}
	var roots []int32
	for r := int32(0); int(r) < n; r++ {
		root := uf.find(r)
		if _, ok := comp[root]; !ok {
			roots = append(roots, root)
		}
		comp[root] = append(comp[root], r)
	}
	for _, root := range roots {
		rs := comp[root]
		if len(rs) < 2 {
			continue
		}
		var rows []int32
		for _, r := range rs {
			rows = append(rows, members[r]...)
		}
		slices.Sort(rows)
		s := a.groupSides(rows)
		a.add(Finding{Severity: Warn, Subject: "across sides", Sides: s, Score: tol, Query: a.queryName("across"),
			Message:  fmt.Sprintf("%d rows agree within %g (relative) on every numeric feature, text equal (%d distinct exact rows): %s", len(rows), tol, len(rs), sideSummary(s)),
			Evidence: map[string]any{"tol": tol, "distinct_exact": len(rs)}})
	}
	a.addQuery(Query{Name: a.queryName("across"), Kind: "check",
		Description: fmt.Sprintf("rows on different sides with equal normalised text, NULLs in the same columns and every numeric feature within %g (relative) of each other, not exact duplicates, linked into groups; no rows = the stored findings hold", tol),
		SQL:         a.tolReplaySQL(exact, numNames, tol)})
	return nil
}

// tolReplaySQL is the stock-SQL recomputation of the tolerance groups: an all-pairs join
// within equal text and NULL pattern (fine for the sizes one replays by hand), exact-key
// classes linked by matching cross-side pairs, and components by a recursive CTE.
func (a *audit) tolReplaySQL(exact keySpec, numNames []string, tol float64) string {
	var tparts []string
	for _, f := range a.feature {
		x := "t." + quoteIdent(f)
		if a.colType(f).SQLType == "TEXT" {
			tparts = append(tparts, fmt.Sprintf("CASE WHEN %s IS NULL THEN 'n' ELSE 'v' || %s END", x, NormalizeSQL(x)))
		} else {
			tparts = append(tparts, fmt.Sprintf("CASE WHEN %s IS NULL THEN 'n' ELSE 'v' END", x))
		}
	}
	exprs := []string{a.keySQL(exact, "t") + " AS key1", strings.Join(tparts, " || '|' || ") + " AS tkey"}
	var conds []string
	ts := strconv.FormatFloat(tol, 'g', -1, 64)
	for j, f := range numNames {
		exprs = append(exprs, fmt.Sprintf("t.%s AS x%d", quoteIdent(f), j+1))
		conds = append(conds, fmt.Sprintf("(a.x%[1]d IS NULL OR abs(a.x%[1]d - b.x%[1]d) <= %[2]s * max(abs(a.x%[1]d), abs(b.x%[1]d)))", j+1, ts))
	}
	ctes := []string{
		a.baseCTE(exprs...),
		"pe(u, v) AS (SELECT DISTINCT a.key1, b.key1 FROM k a JOIN k b ON a.tkey = b.tkey AND a.key1 < b.key1 AND a.side <> b.side WHERE " + strings.Join(conds, " AND ") + ")",
		"ue(u, v) AS (SELECT u, v FROM pe UNION SELECT v, u FROM pe)",
		"reach(a, b) AS (SELECT u, u FROM ue UNION SELECT reach.a, ue.v FROM reach JOIN ue ON ue.u = reach.b)",
		"comp(key1, anchor) AS (SELECT a, min(b) FROM reach GROUP BY a)",
	}
	return a.replaySQL(ctes, `SELECT k.row_id, k.side, min(k.row_id) OVER (PARTITION BY comp.anchor) FROM k JOIN comp ON comp.key1 = k.key1`, "across sides")
}
