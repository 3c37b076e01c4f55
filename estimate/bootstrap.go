package estimate

import (
	"math"
	"sort"

	"gonum.org/v1/gonum/stat/distuv"
)

var stdNormal = distuv.Normal{Mu: 0, Sigma: 1}

// BCaLevel returns the adjusted percentile level of the BCa interval for nominal lower-tail
// level alpha: Φ(ẑ₀ + (ẑ₀ + z_α)/(1 − â(ẑ₀ + z_α))) (Efron & Tibshirani 1993, An
// Introduction to the Bootstrap, eq. 14.10), with bias correction z0 and acceleration acc.
func BCaLevel(z0, acc, alpha float64) float64 {
	za := stdNormal.Quantile(alpha)
	return stdNormal.CDF(z0 + (z0+za)/(1-acc*(z0+za)))
}

// quantileSorted is the type-7 (linear interpolation) sample quantile of sorted values; an
// interpolation that touches +Inf gives +Inf.
func quantileSorted(s []float64, q float64) float64 {
	if len(s) == 0 {
		return math.NaN()
	}
	q = math.Min(math.Max(q, 0), 1)
	h := q * float64(len(s)-1)
	lo := int(math.Floor(h))
	hi := int(math.Ceil(h))
	if lo == hi || s[lo] == s[hi] {
		return s[lo]
	}
	if math.IsInf(s[hi], 0) || math.IsInf(s[lo], 0) {
		return s[hi]
	}
	return s[lo] + (h-float64(lo))*(s[hi]-s[lo])
}

// PercentileInterval is the bootstrap percentile interval of boot at the given level.
func PercentileInterval(est float64, boot []float64, level float64) Interval {
	s := sortedFinite(boot)
	a := (1 - level) / 2
	return Interval{Est: est, Lo: quantileSorted(s, a), Hi: quantileSorted(s, 1-a), Method: "percentile"}
}

// BCaInterval is the bias-corrected and accelerated bootstrap interval (Efron & Tibshirani
// 1993, §14.3): ẑ₀ = Φ⁻¹(#{θ*_b < θ̂}/B) (ties counted half), â = Σ(θ̄₍.₎ − θ₍ᵢ₎)³ /
// (6 (Σ(θ̄₍.₎ − θ₍ᵢ₎)²)^(3/2)) from the jackknife values jack. It falls back to the percentile
// interval when ẑ₀ or â is not finite (all draws on one side, a jackknife value that is not
// finite, or no jackknife variation).
func BCaInterval(est float64, boot, jack []float64, level float64) Interval {
	if math.IsNaN(est) || math.IsInf(est, 0) || len(boot) == 0 || len(jack) < 2 {
		return PercentileInterval(est, boot, level)
	}
	var below float64
	for _, v := range boot {
		switch {
		case v < est:
			below++
		case v == est:
			below += 0.5
		}
	}
	p := below / float64(len(boot))
	if p <= 0 || p >= 1 {
		return PercentileInterval(est, boot, level)
	}
	z0 := stdNormal.Quantile(p)
	var mean float64
	for _, v := range jack {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return PercentileInterval(est, boot, level)
		}
		mean += v
	}
	mean /= float64(len(jack))
	var s2, s3 float64
	for _, v := range jack {
		d := mean - v
		s2 += d * d
		s3 += d * d * d
	}
	if s2 == 0 {
		return PercentileInterval(est, boot, level)
	}
	acc := s3 / (6 * math.Pow(s2, 1.5))
	a := (1 - level) / 2
	l1, l2 := BCaLevel(z0, acc, a), BCaLevel(z0, acc, 1-a)
	if math.IsNaN(l1) || math.IsNaN(l2) {
		return PercentileInterval(est, boot, level)
	}
	s := sortedFinite(boot)
	return Interval{Est: est, Lo: quantileSorted(s, l1), Hi: quantileSorted(s, l2), Method: "bca"}
}

// sortedFinite sorts a copy, dropping NaN (+Inf is kept: it sorts last).
func sortedFinite(x []float64) []float64 {
	s := make([]float64, 0, len(x))
	for _, v := range x {
		if !math.IsNaN(v) {
			s = append(s, v)
		}
	}
	sort.Float64s(s)
	return s
}
