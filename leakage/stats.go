package leakage

import (
	"cmp"
	"math"
	"slices"
	"sort"

	"gonum.org/v1/gonum/stat/distuv"
)

// KSResult is a two-sample Kolmogorov–Smirnov test.
type KSResult struct {
	D      float64 // sup |F1 - F2| over the pooled sample
	P      float64 // two-sided p-value
	Method string  // "exact" or "asymptotic"
	N1, N2 int
}

// KSExactLimit is the largest n1·n2 for which KS2 computes the exact p-value (the same
// switch-over scipy.stats.ks_2samp uses for method='auto'); larger samples use the
// asymptotic Kolmogorov distribution.
const KSExactLimit = 10000

// KS2 runs the two-sample Kolmogorov–Smirnov test on x and y (NaNs must be removed by the
// caller). The p-value is exact (lattice path counting, Hodges 1957) when n1·n2 ≤
// KSExactLimit and asymptotic otherwise. Both inputs are sorted in place.
func KS2(x, y []float64) KSResult {
	n1, n2 := len(x), len(y)
	if n1 == 0 || n2 == 0 {
		return KSResult{D: math.NaN(), P: math.NaN(), N1: n1, N2: n2}
	}
	sort.Float64s(x)
	sort.Float64s(y)
	h := ksNumerator(x, y)
	d := float64(h) / (float64(n1) * float64(n2))
	r := KSResult{D: d, N1: n1, N2: n2}
	if int64(n1)*int64(n2) <= KSExactLimit {
		r.P, r.Method = KSExactP(n1, n2, h), "exact"
	} else {
		r.P, r.Method = KSAsymptoticP(n1, n2, d), "asymptotic"
	}
	return r
}

// ksNumerator returns max |i·n2 − j·n1| over the merged sorted samples, taking all ties
// at once: D = that / (n1·n2), exactly, in integers.
func ksNumerator(x, y []float64) int64 {
	n1, n2 := int64(len(x)), int64(len(y))
	var i, j int64
	var best int64
	for i < n1 && j < n2 {
		v := math.Min(x[i], y[j])
		for i < n1 && x[i] == v {
			i++
		}
		for j < n2 && y[j] == v {
			j++
		}
		d := i*n2 - j*n1
		if d < 0 {
			d = -d
		}
		if d > best {
			best = d
		}
	}
	return best
}

// KSExactP is P(D ≥ h/(n1·n2)) under the null hypothesis for continuous data: the
// probability that a uniformly random monotone lattice path from (0,0) to (n1,n2) reaches a
// point with |i·n2 − j·n1| ≥ h. The path probability is carried step by step (each step
// chooses x with probability (n1−i)/(n1−i+n2−j)), so no binomial coefficient overflows, and
// the probability of first reaching such a point is summed directly rather than taken as one
// minus the staying-inside probability, so small p-values keep their relative precision.
func KSExactP(n1, n2 int, h int64) float64 {
	if h <= 0 {
		return 1
	}
	m, n := int64(n1), int64(n2)
	inside := func(i, j int64) bool {
		d := i*n - j*m
		if d < 0 {
			d = -d
		}
		return d < h
	}
	var out float64               // probability of leaving the band
	prev := make([]float64, n2+1) // prev[j]: probability of reaching (i-1, j) inside
	cur := make([]float64, n2+1)
	prev[0] = 1
	for j := int64(1); j <= n; j++ {
		p := prev[j-1] * float64(n-(j-1)) / float64(m+n-(j-1))
		if inside(0, j) {
			prev[j] = p
		} else {
			out += p
		}
	}
	for i := int64(1); i <= m; i++ {
		for j := int64(0); j <= n; j++ {
			// from (i-1, j) by an x step, and from (i, j-1) by a y step
			p := prev[j] * float64(m-(i-1)) / float64((m-(i-1))+(n-j))
			if j > 0 {
				p += cur[j-1] * float64(n-(j-1)) / float64((m-i)+(n-(j-1)))
			}
			if inside(i, j) {
				cur[j] = p
			} else {
				cur[j] = 0
				out += p
			}
		}
		prev, cur = cur, prev
	}
	return math.Min(1, math.Max(0, out))
}

// KSAsymptoticP is the asymptotic two-sided p-value: the Kolmogorov distribution's
// survival function at sqrt(n1·n2/(n1+n2))·d (Smirnov 1939).
func KSAsymptoticP(n1, n2 int, d float64) float64 {
	en := float64(n1) * float64(n2) / float64(n1+n2)
	return KolmogorovSurvival(math.Sqrt(en) * d)
}

// KolmogorovSurvival is Q(λ) = P(K > λ) = 2 Σ_{k≥1} (−1)^{k−1} exp(−2k²λ²), using the
// equivalent theta-function series sqrt(2π)/λ Σ exp(−(2k−1)²π²/(8λ²)) for P(K ≤ λ) when λ is
// small, where the alternating series converges slowly.
func KolmogorovSurvival(lambda float64) float64 {
	if lambda <= 0 {
		return 1
	}
	if lambda < 1 {
		var s float64
		for k := 1; k <= 20; k++ {
			t := float64(2*k - 1)
			s += math.Exp(-t * t * math.Pi * math.Pi / (8 * lambda * lambda))
		}
		return math.Min(1, math.Max(0, 1-math.Sqrt(2*math.Pi)/lambda*s))
	}
	var s float64
	for k := 1; k <= 100; k++ {
		t := math.Exp(-2 * float64(k*k) * lambda * lambda)
		if k%2 == 1 {
			s += t
		} else {
			s -= t
		}
		if t < 1e-300 {
			break
		}
	}
	return math.Min(1, math.Max(0, 2*s))
}

// ChiSquareResult is a chi-square test of homogeneity on an r×c table of counts.
type ChiSquareResult struct {
	X2       float64 // Pearson's statistic, no continuity correction
	DF       int     // (rows−1)(columns−1) after dropping empty rows and columns
	P        float64 // upper tail of the chi-square distribution (gonum distuv)
	CramersV float64 // sqrt(X² / (N·min(r−1, c−1)))
	N        float64
}

// ChiSquare tests whether the rows of table (e.g. one row per side, one column per level)
// share one distribution. Empty rows and columns are dropped first.
func ChiSquare(table [][]float64) ChiSquareResult {
	var rows [][]float64
	for _, r := range table {
		var s float64
		for _, v := range r {
			s += v
		}
		if s > 0 {
			rows = append(rows, r)
		}
	}
	if len(rows) == 0 {
		return ChiSquareResult{X2: math.NaN(), P: math.NaN(), CramersV: math.NaN()}
	}
	var cols []int
	for j := range rows[0] {
		var s float64
		for _, r := range rows {
			s += r[j]
		}
		if s > 0 {
			cols = append(cols, j)
		}
	}
	R := make([]float64, len(rows))
	C := make([]float64, len(cols))
	var N float64
	for i, r := range rows {
		for k, j := range cols {
			R[i] += r[j]
			C[k] += r[j]
			N += r[j]
		}
	}
	var x2 float64
	for i, r := range rows {
		for k, j := range cols {
			e := R[i] * C[k] / N
			d := r[j] - e
			x2 += d * d / e
		}
	}
	df := (len(rows) - 1) * (len(cols) - 1)
	res := ChiSquareResult{X2: x2, DF: df, N: N}
	if df == 0 {
		res.P, res.CramersV = 1, 0
		return res
	}
	res.P = distuv.ChiSquared{K: float64(df)}.Survival(x2)
	k := math.Min(float64(len(rows)-1), float64(len(cols)-1))
	res.CramersV = math.Sqrt(x2 / (N * k))
	return res
}

// MidRanks returns the 1-based ranks of x, ties given the mean of the ranks they span.
func MidRanks(x []float64) []float64 {
	// Ties share one rank, so the order among equal values does not matter: an unstable sort
	// of (value, index) pairs (several times faster than a stable sort of indexes).
	type vi struct {
		v float64
		i int32
	}
	idx := make([]vi, len(x))
	for i, v := range x {
		idx[i] = vi{v, int32(i)}
	}
	slices.SortFunc(idx, func(a, b vi) int { return cmp.Compare(a.v, b.v) })
	r := make([]float64, len(x))
	for i := 0; i < len(idx); {
		j := i + 1
		for j < len(idx) && idx[j].v == idx[i].v {
			j++
		}
		mid := float64(i+j+1) / 2 // mean of ranks i+1..j
		for k := i; k < j; k++ {
			r[idx[k].i] = mid
		}
		i = j
	}
	return r
}

// AUC is the area under the ROC curve of score for the positive class, computed as the
// Mann–Whitney U of the positives divided by n1·n0, ties counting one half. It is NaN when
// either class is empty.
func AUC(score []float64, positive []bool) float64 {
	r := MidRanks(score)
	var n1, n0, r1 float64
	for i, p := range positive {
		if p {
			n1++
			r1 += r[i]
		} else {
			n0++
		}
	}
	if n1 == 0 || n0 == 0 {
		return math.NaN()
	}
	u := r1 - n1*(n1+1)/2
	return u / (n1 * n0)
}

// Spearman is Spearman's rank correlation: Pearson's correlation of the mid-ranks. It is NaN
// when either variable is constant or fewer than two pairs are given.
func Spearman(x, y []float64) float64 {
	if len(x) < 2 || len(x) != len(y) {
		return math.NaN()
	}
	return pearson(MidRanks(x), MidRanks(y))
}

func pearson(x, y []float64) float64 {
	n := float64(len(x))
	var mx, my float64
	for i := range x {
		mx += x[i]
		my += y[i]
	}
	mx /= n
	my /= n
	var sxy, sxx, syy float64
	for i := range x {
		dx, dy := x[i]-mx, y[i]-my
		sxy += dx * dy
		sxx += dx * dx
		syy += dy * dy
	}
	if sxx == 0 || syy == 0 {
		return math.NaN()
	}
	return sxy / math.Sqrt(sxx*syy)
}

// PSIEpsilon replaces the share of a bin that is empty on one side, so that PSI stays finite
// (common practice, no published source).
const PSIEpsilon = 1e-4

// PSIBins is the number of quantile bins PSINumeric uses by default (deciles; common
// practice, no published source).
const PSIBins = 10

// PSI is the Population Stability Index Σ (a−e)·ln(a/e) between the expected (reference)
// and actual bin counts; each side's counts are turned into shares and a zero share is
// replaced by PSIEpsilon.
func PSI(expected, actual []float64) float64 {
	var se, sa float64
	for i := range expected {
		se += expected[i]
		sa += actual[i]
	}
	if se == 0 || sa == 0 {
		return math.NaN()
	}
	var psi float64
	for i := range expected {
		e, a := expected[i]/se, actual[i]/sa
		if e == 0 && a == 0 {
			continue
		}
		e, a = math.Max(e, PSIEpsilon), math.Max(a, PSIEpsilon)
		psi += (a - e) * math.Log(a/e)
	}
	return psi
}

// QuantileEdges returns the distinct upper edges of bins quantile bins of the reference
// sample: edge k is the reference's empirical quantile k/bins (the smallest value with at
// least k/bins of the sample at or below it; Hyndman & Fan type 1), for k = 1..bins−1.
// ref must be sorted.
func QuantileEdges(ref []float64, bins int) []float64 {
	var edges []float64
	n := len(ref)
	for k := 1; k < bins; k++ {
		idx := int(math.Ceil(float64(k)*float64(n)/float64(bins))) - 1
		if idx < 0 {
			idx = 0
		}
		if idx >= n {
			break
		}
		e := ref[idx]
		if len(edges) == 0 || e > edges[len(edges)-1] {
			edges = append(edges, e)
		}
	}
	return edges
}

// BinIndex returns the bin of x for upper edges: bin k holds edges[k−1] < x ≤ edges[k], the
// last bin everything above the last edge.
func BinIndex(edges []float64, x float64) int {
	return sort.SearchFloat64s(edges, x)
}

// PSINumeric is the PSI of actual against reference, binned at the reference's quantile
// edges (PSIBins bins), with missing values (NaN) as a bin of their own.
func PSINumeric(reference, actual []float64) float64 {
	var ref []float64
	for _, v := range reference {
		if !math.IsNaN(v) {
			ref = append(ref, v)
		}
	}
	sort.Float64s(ref)
	edges := QuantileEdges(ref, PSIBins)
	nb := len(edges) + 2
	e := make([]float64, nb)
	a := make([]float64, nb)
	count := func(xs []float64, c []float64) {
		for _, v := range xs {
			if math.IsNaN(v) {
				c[nb-1]++
			} else {
				c[BinIndex(edges, v)]++
			}
		}
	}
	count(reference, e)
	count(actual, a)
	return PSI(e, a)
}

// HoldoutSE is the standard error sqrt(p(1−p)/n) of an error rate p measured on n rows.
func HoldoutSE(p float64, n int) float64 {
	if n <= 0 {
		return math.Inf(1)
	}
	return math.Sqrt(p * (1 - p) / float64(n))
}

// MinDetectableDifference is the smallest difference between two error rates near p that a
// holdout of n rows resolves at two-sided level alpha, treating the two estimates as
// independent: z_{1−α/2}·sqrt(2)·SE. Paired comparisons on the same rows (McNemar) can do
// better, so this is a conservative screen.
func MinDetectableDifference(p float64, n int, alpha float64) float64 {
	z := distuv.UnitNormal.Quantile(1 - alpha/2)
	return z * math.Sqrt2 * HoldoutSE(p, n)
}

// RowsToDetect is the holdout size at which MinDetectableDifference(p, n, alpha) ≤ delta.
func RowsToDetect(p, delta, alpha float64) int {
	z := distuv.UnitNormal.Quantile(1 - alpha/2)
	return int(math.Ceil(2 * z * z * p * (1 - p) / (delta * delta)))
}
