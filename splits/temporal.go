package splits

import (
	"cmp"
	"fmt"
	"math"
	"slices"
	"sort"
)

// timeOrder returns row indices sorted by (time, ss_row).
func timeOrder(d *data, rows []int) []int {
	if rows == nil {
		rows = make([]int, 0, d.n)
		for i := 0; i < d.n; i++ {
			if !d.tBad[i] {
				rows = append(rows, i)
			}
		}
	}
	// Rows are in ss_row order, so a stable sort by time gives (time, ss_row) order: a
	// stable radix sort of the times as order-preserving integers.
	keys := make([]uint64, len(rows))
	idx := make([]int32, len(rows))
	for j, i := range rows {
		t := d.t[i]
		if t != t { // NaN: cmp.Compare's order, by the comparison sort
			return timeOrderCmp(d, rows)
		}
		keys[j] = floatKey(t)
		idx[j] = int32(i)
	}
	radixSort(keys, idx)
	for j := range idx {
		rows[j] = int(idx[j])
	}
	return rows
}

// floatKey maps a float64 (not NaN) to a uint64 of the same order; -0 and +0 are equal.
func floatKey(f float64) uint64 {
	if f == 0 {
		f = 0
	}
	b := math.Float64bits(f)
	if b>>63 != 0 {
		return ^b
	}
	return b | 1<<63
}

// timeOrderCmp is timeOrder by a stable comparison sort (for times with NaN).
func timeOrderCmp(d *data, rows []int) []int {
	type tk struct {
		t float64
		i int
	}
	ks := make([]tk, len(rows))
	for j, i := range rows {
		ks[j] = tk{d.t[i], i}
	}
	slices.SortStableFunc(ks, func(a, b tk) int { return cmp.Compare(a.t, b.t) })
	for j := range ks {
		rows[j] = ks[j].i
	}
	return rows
}

func (s *Spec) gapValue(numeric bool) (float64, error) {
	if s.Gap == "" {
		return 0, nil
	}
	g, err := ParseGap(s.Gap, numeric)
	if err != nil {
		return 0, fieldErr("gap", "%v", err)
	}
	return g, nil
}

// assignTime holds out the latest period. The sides are in time order; the boundary before
// side i+1 is the cutoff, or the time of the row at position round(c_i * n) in (time, ss_row)
// order, and every row at or after a boundary's time is on the later side (rows with equal
// times never straddle a boundary). Then, for each boundary B between an earlier and a later
// side, earlier-side rows are dropped when
//
//	gap:    time >= B - gap (or the last gap_rows rows before B, in time order)  → "gap"
//	purge:  label_end >= B (the label was not known before the later period began) → "purge"
//
// which is the purging and embargo of López de Prado (2018, ch. 7) for a train period that
// precedes its test period: no training label may overlap the test period, and a gap keeps
// serially correlated rows next to the test period out of training. With group columns, an
// entity whose rows fall on more than one side is handled by spec.Span (see Spec).
func assignTime(d *data, spec *Spec, fr []float64, a *assignment) error {
	gap, err := spec.gapValue(d.numeric)
	if err != nil {
		return err
	}
	for i := 0; i < d.n; i++ {
		if d.tBad[i] {
			a.side[i], a.reason[i] = -1, reasonTime
		}
	}
	if d.badTimes > 0 {
		a.notes["time_invalid_rows"] = d.badTimes
	}
	var order []int
	if spec.Until == "" {
		order = timeOrder(d, nil)
	} else {
		// Rows later than --until are implausible: they leave before anything is counted,
		// so cutoffs, fractions, gaps and spans see only the plausible rows.
		u, err := untilValue(spec, d.numeric)
		if err != nil {
			return err
		}
		rows := make([]int, 0, d.n)
		for i := 0; i < d.n; i++ {
			switch {
			case d.tBad[i]:
			case d.t[i] > u:
				a.side[i], a.reason[i] = -1, reasonAfterUntil
			default:
				rows = append(rows, i)
			}
		}
		order = timeOrder(d, rows)
	}
	n := len(order)
	if n == 0 {
		if spec.Until != "" {
			return &DataError{Msg: fmt.Sprintf("column %q (--time): no row has a usable time at or before --until %s", spec.Time, spec.Until)}
		}
		return &DataError{Msg: fmt.Sprintf("column %q (--time): no row has a usable time", spec.Time)}
	}
	ns := len(spec.Sides)
	bounds := make([]float64, ns-1) // time at which side i+1 starts
	bpos := make([]int, ns-1)       // position in order where side i+1 starts
	if spec.Cutoff != "" {
		var c float64
		var ok bool
		if d.numeric {
			_, _, ok = timeValue(spec.Cutoff, true)
			c, _, _ = timeValue(spec.Cutoff, true)
		} else {
			c, ok = ParseTimeText(spec.Cutoff)
		}
		if !ok {
			return fieldErr("cutoff", "%q is not a %s like the values of %q", spec.Cutoff, timeKind(d.numeric), spec.Time)
		}
		if spec.Until != "" {
			if u, _ := untilValue(spec, d.numeric); c > u {
				return fieldErr("until", "%q is before --cutoff %q: every row of the later side would be dropped", spec.Until, spec.Cutoff)
			}
		}
		bounds[0] = c
		bpos[0] = sort.Search(n, func(k int) bool { return d.t[order[k]] >= c })
	} else {
		cum := 0.0
		for i := 0; i < ns-1; i++ {
			cum += fr[i]
			p := int(math.Round(cum * float64(n)))
			if p >= n {
				bounds[i], bpos[i] = math.Inf(1), n
				continue
			}
			b := d.t[order[p]]
			bounds[i] = b
			bpos[i] = sort.Search(n, func(k int) bool { return d.t[order[k]] >= b })
		}
	}
	side := 0
	for k, i := range order {
		for side < ns-1 && k >= bpos[side] {
			side++
		}
		a.side[i] = int16(side)
	}
	timeSide := append([]int16(nil), a.side...)
	if len(spec.Group) > 0 {
		applySpan(d, spec, fr, a, timeSide)
	}
	// Gap and purge, per boundary, on rows still on the earlier sides.
	for b := 0; b < ns-1; b++ {
		B := bounds[b]
		if math.IsInf(B, 1) {
			continue
		}
		for k := 0; k < bpos[b]; k++ {
			i := order[k]
			if a.side[i] < 0 || int(a.side[i]) > b {
				continue
			}
			switch {
			case spec.Gap != "" && d.t[i] >= B-gap:
				a.side[i], a.reason[i] = -1, reasonGap
			case spec.GapRows > 0 && k >= bpos[b]-spec.GapRows:
				a.side[i], a.reason[i] = -1, reasonGap
			case d.labelEnd != nil && d.labelEnd[i] >= B:
				a.side[i], a.reason[i] = -1, reasonPurge
			}
		}
	}
	return nil
}

// untilValue parses spec.Until like the time column's values (Unix seconds, or a number).
func untilValue(spec *Spec, numeric bool) (float64, error) {
	var u float64
	var ok bool
	if numeric {
		u, _, ok = timeValue(spec.Until, true)
		ok = ok && !math.IsNaN(u)
	} else {
		u, ok = ParseTimeText(spec.Until)
	}
	if !ok {
		return 0, fieldErr("until", "%q is not a %s like the values of %q", spec.Until, timeKind(numeric), spec.Time)
	}
	return u, nil
}

// applySpan resolves entities whose rows fall on more than one side of the time split:
// drop (all their rows, reason "span"), earlier (all rows to the earliest side they touch),
// entity (every entity takes the side of its hash under the fractions; its rows on another
// time side are dropped, reason "span", so no entity is on two sides and time order holds).
func applySpan(d *data, spec *Spec, fr []float64, a *assignment, timeSide []int16) {
	ne := len(d.entKey)
	lo := make([]int16, ne)
	hi := make([]int16, ne)
	for e := range lo {
		lo[e], hi[e] = math.MaxInt16, -1
	}
	for i := 0; i < d.n; i++ {
		if timeSide[i] < 0 {
			continue
		}
		e := d.entity[i]
		lo[e] = min(lo[e], timeSide[i])
		hi[e] = max(hi[e], timeSide[i])
	}
	spanning := 0
	for e := 0; e < ne; e++ {
		if lo[e] != hi[e] {
			spanning++
		}
	}
	cum := Cumulative(fr)
	dropped := 0
	for i := 0; i < d.n; i++ {
		if timeSide[i] < 0 {
			continue
		}
		e := d.entity[i]
		switch spec.Span {
		case "drop":
			if lo[e] != hi[e] {
				a.side[i], a.reason[i] = -1, reasonSpan
				dropped++
			}
		case "earlier":
			a.side[i] = lo[e]
		case "entity":
			if s := int16(SideIndex(d.entU[e], cum)); s != timeSide[i] {
				a.side[i], a.reason[i] = -1, reasonSpan
				dropped++
			}
		}
	}
	a.notes["spanning_entities"] = spanning
	a.notes["span_policy"] = spec.Span
	a.notes["span_dropped_rows"] = dropped
}

// assignRolling makes rolling-origin folds (an expanding window) over the train side's rows
// in (time, ss_row) order, as scikit-learn's TimeSeriesSplit does: with m rows, K folds and
// test size s (default m / (K+1)), fold k's test block starts at position
// m - (K - k + 1)·s and holds s rows; its training part is every earlier row more than the
// gap before the block: position < start_k - gap_rows, time < time(start_k) - gap, and
// (with --label-end) label_end < time(start_k), so labels never reach into the test block.
// A row's train_from is the first fold whose training part holds it (the conditions only
// loosen as k grows, so it trains in every later fold as well). With --group, an entity's
// rows train only after the last fold that tests one of its rows.
func assignRolling(d *data, spec *Spec, a *assignment) error {
	gap, err := spec.gapValue(d.numeric)
	if err != nil {
		return err
	}
	ti := trainIndex(spec, a.sides)
	if ti < 0 {
		return fieldErr("folds", "folds are made within the train side; name a side train or give --train-side")
	}
	var rows []int
	for i := 0; i < d.n; i++ {
		if int(a.side[i]) == ti {
			rows = append(rows, i)
		}
	}
	order := timeOrder(d, rows)
	m, K := len(order), spec.Folds
	ts := spec.TestSize
	if ts == 0 {
		ts = m / (K + 1)
	}
	if ts == 0 || K*ts > m-1 {
		return fieldErr("folds", "%d rolling-origin folds with test size %d need more than %d rows on side %q; it has %d", K, max(ts, 1), K*max(ts, 1), a.sides[ti], m)
	}
	a.fold = make([]int32, d.n)
	a.trainFrom = make([]int32, d.n)
	start := make([]int, K+1)
	for k := 1; k <= K; k++ {
		start[k] = m - (K-k+1)*ts
	}
	for p, i := range order {
		for k := 1; k <= K; k++ {
			if p >= start[k] && p < start[k]+ts {
				a.fold[i] = int32(k)
			}
		}
		for k := 1; k <= K; k++ {
			t0 := d.t[order[start[k]]]
			if p < start[k]-spec.GapRows && (spec.Gap == "" || d.t[i] < t0-gap) && (d.labelEnd == nil || d.labelEnd[i] < t0) {
				a.trainFrom[i] = int32(k)
				break
			}
		}
	}
	grouped := len(spec.Group) > 0 && d.entity != nil
	if grouped {
		// No entity both trains and is tested in one fold: an entity's rows train only in
		// the folds after the last fold that tests any of its rows (the training part of
		// every fold only grows, so that is again one train_from per row).
		last := map[int32]int32{}
		for _, i := range order {
			if f := a.fold[i]; f > 0 && f > last[d.entity[i]] {
				last[d.entity[i]] = f
			}
		}
		purged := 0
		for _, i := range order {
			if l, ok := last[d.entity[i]]; ok && a.trainFrom[i] != 0 && a.trainFrom[i] <= l {
				purged++
				if a.trainFrom[i] = l + 1; l+1 > int32(K) {
					a.trainFrom[i] = 0
				}
			}
		}
		a.notes["rolling_group_purged_rows"] = purged
	}
	for k := 1; k <= K; k++ {
		st := foldStat{fold: k, testRows: ts, hasGroups: grouped}
		trainG, testG := map[int32]bool{}, map[int32]bool{}
		for p := 0; p < start[k]+ts; p++ {
			i := order[p]
			switch {
			case p >= start[k]:
				if grouped {
					testG[d.entity[i]] = true
				}
			case a.trainFrom[i] != 0 && a.trainFrom[i] <= int32(k):
				st.trainRows++
				if grouped {
					trainG[d.entity[i]] = true
				}
			default:
				st.excluded++
			}
		}
		st.trainGroups, st.testGroups = len(trainG), len(testG)
		if grouped && st.trainRows == 0 {
			return fieldErr("folds", "rolling fold %d has no training rows once each entity trains only after the last fold that tests it (its entities reach into the later test blocks); use fewer folds, or a grouped time holdout", k)
		}
		a.folds = append(a.folds, st)
	}
	if K*ts < m {
		a.notes["rolling_test_size"] = ts
	}
	return nil
}
