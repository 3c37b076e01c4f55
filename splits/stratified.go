package splits

import (
	"math"
	"sort"
)

// assignStratified: mode "hash" is the random rule (pure hash thresholds, append-stable,
// per-stratum proportions only approximately on target). Mode "exact" sorts each stratum's
// rows by (u, ss_row) and cuts them at the largest-remainder quotas of the fractions, so each
// stratum is within one row of its target on every side; it is reproducible but not
// append-stable (new rows shift the cut points of their stratum).
func assignStratified(d *data, spec *Spec, fr, cum []float64, a *assignment) error {
	if spec.StratifyMode == "hash" {
		for i := 0; i < d.n; i++ {
			a.side[i] = int16(SideIndex(d.u[i], cum))
		}
	} else {
		for _, rows := range strataRows(d) {
			sortByU(rows, d.u, d.rowID)
			q := largestRemainder(len(rows), fr)
			k := 0
			for s, n := range q {
				for j := 0; j < n; j++ {
					a.side[rows[k]] = int16(s)
					k++
				}
			}
		}
	}
	a.notes["strata"] = len(d.strata)
	a.notes["max_stratum_deviation_rows"] = stratumDeviation(d, fr, a, nil)
	return nil
}

// strataRows lists row indices per stratum (stratum order).
func strataRows(d *data) [][]int {
	out := make([][]int, len(d.strata))
	for i, s := range d.stratum {
		out[s] = append(out[s], i)
	}
	return out
}

func sortByU(rows []int, u []float64, id []int64) {
	sort.Slice(rows, func(i, j int) bool {
		a, b := rows[i], rows[j]
		if u[a] != u[b] {
			return u[a] < u[b]
		}
		return id[a] < id[b]
	})
}

// stratumDeviation is the largest |rows of stratum s on side i - f_i * n_s| over strata and
// sides, among rows that are on a side.
func stratumDeviation(d *data, fr []float64, a *assignment, _ []int) float64 {
	cnt := make([][]int, len(d.strata))
	for s := range cnt {
		cnt[s] = make([]int, len(fr))
	}
	for i, s := range d.stratum {
		if a.side[i] >= 0 {
			cnt[s][a.side[i]]++
		}
	}
	worst := 0.0
	for _, c := range cnt {
		n := 0
		for _, x := range c {
			n += x
		}
		for i, x := range c {
			worst = math.Max(worst, math.Abs(float64(x)-fr[i]*float64(n)))
		}
	}
	return math.Round(worst*1e6) / 1e6
}

// assignStratifiedGrouped is best effort: each entity takes its most frequent stratum (ties:
// the smallest label); within a stratum entities are taken in (u, key) order and each goes to
// the side whose cumulative row target contains the entity's row midpoint. The achieved
// deviation is reported (max_stratum_deviation_rows), since whole entities cannot hit a row
// target exactly.
func assignStratifiedGrouped(d *data, fr []float64, a *assignment) {
	ne := len(d.entKey)
	size := make([]int, ne)
	votes := make([]map[int32]int, ne)
	for i := 0; i < d.n; i++ {
		e := d.entity[i]
		size[e]++
		if votes[e] == nil {
			votes[e] = map[int32]int{}
		}
		votes[e][d.stratum[i]]++
	}
	entStratum := make([]int32, ne)
	byStratum := make([][]int, len(d.strata))
	for e := 0; e < ne; e++ {
		best, bestN := int32(-1), -1
		for s, n := range votes[e] {
			if n > bestN || (n == bestN && d.strata[s] < d.strata[best]) {
				best, bestN = s, n
			}
		}
		entStratum[e] = best
		byStratum[best] = append(byStratum[best], e)
	}
	entSide := make([]int16, ne)
	cum := Cumulative(fr)
	for _, ents := range byStratum {
		sort.Slice(ents, func(i, j int) bool {
			if d.entU[ents[i]] != d.entU[ents[j]] {
				return d.entU[ents[i]] < d.entU[ents[j]]
			}
			return string(d.entKey[ents[i]]) < string(d.entKey[ents[j]])
		})
		total := 0
		for _, e := range ents {
			total += size[e]
		}
		before := 0
		for _, e := range ents {
			mid := (float64(before) + float64(size[e])/2) / float64(total)
			entSide[e] = int16(SideIndex(mid, cum))
			before += size[e]
		}
	}
	for i := 0; i < d.n; i++ {
		a.side[i] = entSide[d.entity[i]]
	}
	a.notes["strata"] = len(d.strata)
	a.notes["max_stratum_deviation_rows"] = stratumDeviation(d, fr, a, nil)
}
