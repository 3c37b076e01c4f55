package splits

import (
	"fmt"
	"sort"
)

// assignFolds makes K folds within the train side:
//
//	random              fold = floor(u' · K) + 1, u' = the row's u rescaled to its side's
//	                    interval [c_{i-1}, c_i): a pure function of the key (append-stable);
//	                    fold sizes are binomial around n/K.
//	stratified (exact)  per stratum, rows in (u, ss_row) order are dealt round-robin, so each
//	                    stratum is within one row of n_s/K in every fold; a stratum with fewer
//	                    than K rows is refused.
//	stratified (hash)   as random.
//	grouped             whole entities, largest first (ties by u), each to the fold with the
//	                    fewest rows so far (ties: lowest fold), as scikit-learn's GroupKFold
//	                    balances folds; no entity is in two folds. Not append-stable.
func assignFolds(d *data, spec *Spec, a *assignment) error {
	ti := trainIndex(spec, a.sides)
	if ti < 0 {
		return fieldErr("folds", "folds are made within the train side; name a side train or give --train-side")
	}
	K := spec.Folds
	a.fold = make([]int32, d.n)
	lo := 0.0
	for i := 0; i < ti; i++ {
		lo += spec.Sides[i].Fraction
	}
	hi := lo + spec.Sides[ti].Fraction
	if ti == len(spec.Sides)-1 {
		hi = 1
	}
	grouped := len(spec.Group) > 0
	switch {
	case grouped:
		ne := len(d.entKey)
		size := make([]int, ne)
		onTrain := make([]bool, ne)
		for i := 0; i < d.n; i++ {
			if int(a.side[i]) == ti {
				size[d.entity[i]]++
				onTrain[d.entity[i]] = true
			}
		}
		var ents []int
		for e := 0; e < ne; e++ {
			if onTrain[e] {
				ents = append(ents, e)
			}
		}
		if len(ents) < K {
			return fieldErr("folds", "%d folds need at least %d entities on side %q; it has %d", K, K, a.sides[ti], len(ents))
		}
		sort.Slice(ents, func(i, j int) bool {
			x, y := ents[i], ents[j]
			if size[x] != size[y] {
				return size[x] > size[y]
			}
			if d.entU[x] != d.entU[y] {
				return d.entU[x] < d.entU[y]
			}
			return string(d.entKey[x]) < string(d.entKey[y])
		})
		load := make([]int, K)
		entFold := make([]int32, ne)
		for _, e := range ents {
			best := 0
			for f := 1; f < K; f++ {
				if load[f] < load[best] {
					best = f
				}
			}
			load[best] += size[e]
			entFold[e] = int32(best + 1)
		}
		for i := 0; i < d.n; i++ {
			if int(a.side[i]) == ti {
				a.fold[i] = entFold[d.entity[i]]
			}
		}
	case spec.Stratify != "" && spec.StratifyMode == "exact":
		per := make([][]int, len(d.strata))
		for i := 0; i < d.n; i++ {
			if int(a.side[i]) == ti {
				per[d.stratum[i]] = append(per[d.stratum[i]], i)
			}
		}
		for s, rows := range per {
			if len(rows) > 0 && len(rows) < K {
				return fieldErr("folds", "stratum %s=%q has %d row(s) on side %q, fewer than the %d folds asked for", spec.Stratify, d.strata[s], len(rows), a.sides[ti], K)
			}
			sortByU(rows, d.u, d.rowID)
			for r, i := range rows {
				a.fold[i] = int32(r%K + 1)
			}
		}
	default:
		for i := 0; i < d.n; i++ {
			if int(a.side[i]) != ti {
				continue
			}
			v := (d.u[i] - lo) / (hi - lo)
			f := int(v * float64(K))
			if f >= K {
				f = K - 1
			}
			if f < 0 {
				f = 0
			}
			a.fold[i] = int32(f + 1)
		}
	}
	a.folds = kfoldStats(d, a, K, grouped)
	for _, st := range a.folds {
		if st.testRows == 0 {
			return fieldErr("folds", "fold %d of %d is empty: side %q has too few rows (or entities) for %d folds", st.fold, K, a.sides[ti], K)
		}
	}
	return nil
}

// kfoldStats counts, per fold k, test rows (fold = k) and train rows (other folded rows).
func kfoldStats(d *data, a *assignment, K int, grouped bool) []foldStat {
	out := make([]foldStat, K)
	total := 0
	for i := range out {
		out[i] = foldStat{fold: i + 1, hasGroups: grouped}
	}
	var seen [][]bool // per fold: entities with a test row in it
	var all []bool
	allEnts := 0
	if grouped {
		seen = make([][]bool, K)
		for i := range seen {
			seen[i] = make([]bool, len(d.entKey))
		}
		all = make([]bool, len(d.entKey))
	}
	for i := 0; i < d.n; i++ {
		f := a.fold[i]
		if f <= 0 || int(f) > K {
			continue
		}
		total++
		out[f-1].testRows++
		if grouped {
			e := d.entity[i]
			if !seen[f-1][e] {
				seen[f-1][e] = true
				out[f-1].testGroups++
			}
			if !all[e] {
				all[e] = true
				allEnts++
			}
		}
	}
	for k := range out {
		out[k].trainRows = total - out[k].testRows
		if grouped {
			out[k].trainGroups = allEnts - out[k].testGroups
		}
	}
	return out
}

var _ = fmt.Sprint
