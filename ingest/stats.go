package ingest

import (
	"math"
	"slices"
)

// Summary statistics used by the profile and by the ingest_* SQL aggregates.
//
// Mean and standard deviation use the corrected two-pass algorithm (Chan, Golub and LeVeque,
// "Algorithms for computing the sample variance", The American Statistician 37(3), 1983):
// a compensated (Neumaier) sum gives a first mean, one more pass refines it with the
// compensated sum of deviations, and the variance is (Σd² − (Σd)²/n)/(n−1) with both sums
// compensated. Checked against the NIST StRD univariate certified values (stats_test.go).

// neumaier is a compensated running sum (Neumaier's improvement of Kahan summation).
type neumaier struct{ sum, c float64 }

func (s *neumaier) add(x float64) {
	t := s.sum + x
	if math.Abs(s.sum) >= math.Abs(x) {
		s.c += (s.sum - t) + x
	} else {
		s.c += (x - t) + s.sum
	}
	s.sum = t
}

func (s *neumaier) value() float64 { return s.sum + s.c }

// Mean returns the arithmetic mean of x (NaN for an empty slice).
func Mean(x []float64) float64 {
	if len(x) == 0 {
		return math.NaN()
	}
	var s neumaier
	for _, v := range x {
		s.add(v)
	}
	m := s.value() / float64(len(x))
	// Refine with the compensated mean deviation: removes the rounding of the first division.
	var d neumaier
	for _, v := range x {
		d.add(v - m)
	}
	return m + d.value()/float64(len(x))
}

// MeanSD returns the mean and the sample standard deviation (denominator n−1) of x. The SD is
// NaN when len(x) < 2, and both are NaN for an empty slice.
func MeanSD(x []float64) (mean, sd float64) {
	mean = Mean(x)
	if len(x) < 2 {
		return mean, math.NaN()
	}
	var s2, s1 neumaier
	for _, v := range x {
		d := v - mean
		s1.add(d)
		s2.add(d * d)
	}
	n := float64(len(x))
	c := s1.value()
	v := (s2.value() - c*c/n) / (n - 1)
	if v < 0 {
		v = 0
	}
	return mean, math.Sqrt(v)
}

// Quantile returns the p-quantile (0 ≤ p ≤ 1) of the ascending-sorted slice x by Hyndman and
// Fan's definition 7 (R's default, numpy.percentile's default "linear"): with h = (n−1)p,
// Q(p) = x[⌊h⌋] + (h − ⌊h⌋)(x[⌊h⌋+1] − x[⌊h⌋]) on 0-based indices. NaN for an empty slice
// or p outside [0, 1].
func Quantile(sorted []float64, p float64) float64 {
	n := len(sorted)
	if n == 0 || !(p >= 0 && p <= 1) {
		return math.NaN()
	}
	h := float64(n-1) * p
	lo := int(math.Floor(h))
	if lo >= n-1 {
		return sorted[n-1]
	}
	return sorted[lo] + (h-float64(lo))*(sorted[lo+1]-sorted[lo])
}

// Quantiles sorts a copy of x and returns Quantile at each p.
func Quantiles(x []float64, ps ...float64) []float64 {
	s := slices.Clone(x)
	slices.Sort(s)
	out := make([]float64, len(ps))
	for i, p := range ps {
		out[i] = Quantile(s, p)
	}
	return out
}

// Fences are Tukey's fences: values below Low or above High are outliers.
type Fences struct {
	Q1, Q3, IQR, K, Low, High float64
}

// TukeyFences returns the fences Q1 − k·IQR and Q3 + k·IQR (Tukey, Exploratory Data
// Analysis, 1977: k = 1.5 gives the inner fences, k = 3 the outer ones).
func TukeyFences(q1, q3, k float64) Fences {
	iqr := q3 - q1
	return Fences{Q1: q1, Q3: q3, IQR: iqr, K: k, Low: q1 - k*iqr, High: q3 + k*iqr}
}

// Outside reports whether x lies strictly outside the fences.
func (f Fences) Outside(x float64) bool { return x < f.Low || x > f.High }

// TukeyOutlier reports whether x lies outside Q1 − 1.5·IQR .. Q3 + 1.5·IQR.
func TukeyOutlier(x, q1, q3 float64) bool { return TukeyFences(q1, q3, 1.5).Outside(x) }
