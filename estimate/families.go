package estimate

import (
	"fmt"
	"math"
)

// Family is one learning-curve shape err(n; θ). The bounds keep every curve non-increasing
// in n (b ≥ 0; log2: b ≤ 0), as a holdout error curve is: a flat or rising measured curve is
// fitted as flat (b = 0) rather than as a curve that rises from an asymptote.
type Family struct {
	Name   string
	Doc    string
	Params []string // parameter names in order
	F      func(n float64, p []float64) float64
	// Grad writes ∂F/∂θ into g.
	Grad func(n float64, p, g []float64)
	// Lower and Upper bound each parameter (±Inf where free).
	Lower, Upper []float64
	// Asymptote returns err(∞) (0 when the family has none).
	Asymptote func(p []float64) float64
	// NStar returns the n at which err reaches T, +Inf when it never does; nil means solve
	// numerically.
	NStar func(T float64, p []float64) float64
	// Start returns starting values from the per-size means.
	Start func(n, err []float64) []float64
}

const cMin = 1e-9 // c > 0: the lower bound LeastSquares enforces

var inf = math.Inf(1)

// Families is every built-in curve family, in the order they are tried and reported.
var Families = []*Family{pow3Family, pow2Family, exp3Family, log2Family, flatFamily}

// FamilyByName returns the named family or an error listing the known ones.
func FamilyByName(name string) (*Family, error) {
	for _, f := range Families {
		if f.Name == name {
			return f, nil
		}
	}
	return nil, fmt.Errorf("unknown curve family %q (known: pow3, pow2, exp3, log2, flat)", name)
}

var pow3Family = &Family{
	Name:   "pow3",
	Doc:    "inverse power law a + b·n^(−c)",
	Params: []string{"a", "b", "c"},
	F:      func(n float64, p []float64) float64 { return p[0] + p[1]*math.Pow(n, -p[2]) },
	Grad: func(n float64, p, g []float64) {
		t := math.Pow(n, -p[2])
		g[0], g[1], g[2] = 1, t, -p[1]*t*math.Log(n)
	},
	Lower:     []float64{0, 0, cMin},
	Upper:     []float64{inf, inf, inf},
	Asymptote: func(p []float64) float64 { return p[0] },
	NStar:     NStarPow3Params,
	Start:     startPow3,
}

var pow2Family = &Family{
	Name:   "pow2",
	Doc:    "power law b·n^(−c) (asymptote 0)",
	Params: []string{"b", "c"},
	F:      func(n float64, p []float64) float64 { return p[0] * math.Pow(n, -p[1]) },
	Grad: func(n float64, p, g []float64) {
		t := math.Pow(n, -p[1])
		g[0], g[1] = t, -p[0]*t*math.Log(n)
	},
	Lower:     []float64{0, cMin},
	Upper:     []float64{inf, inf},
	Asymptote: func(p []float64) float64 { return 0 },
	NStar: func(T float64, p []float64) float64 {
		if T <= 0 || p[0] <= 0 {
			return inf
		}
		return math.Pow(p[0]/T, 1/p[1])
	},
	Start: func(n, e []float64) []float64 {
		b, c := logLogLine(n, e, 0)
		return []float64{b, c}
	},
}

var exp3Family = &Family{
	Name:   "exp3",
	Doc:    "exponential a + b·e^(−c·n)",
	Params: []string{"a", "b", "c"},
	F:      func(n float64, p []float64) float64 { return p[0] + p[1]*math.Exp(-p[2]*n) },
	Grad: func(n float64, p, g []float64) {
		t := math.Exp(-p[2] * n)
		g[0], g[1], g[2] = 1, t, -p[1]*n*t
	},
	Lower:     []float64{0, 0, cMin},
	Upper:     []float64{inf, inf, inf},
	Asymptote: func(p []float64) float64 { return p[0] },
	NStar: func(T float64, p []float64) float64 {
		if T <= p[0] || p[1] <= 0 {
			return inf
		}
		return math.Max(0, math.Log(p[1]/(T-p[0]))/p[2])
	},
	Start: func(n, e []float64) []float64 {
		lo, hi := minmax(e)
		nmax := n[len(n)-1]
		a := math.Max(0, lo-0.05*(hi-lo))
		// e^(−c·n) halves the excess over the observed range.
		c := math.Ln2 / (0.25 * nmax)
		b := (hi - a) / math.Exp(-c*n[0])
		return []float64{a, b, c}
	},
}

var log2Family = &Family{
	Name:   "log2",
	Doc:    "logarithmic a + b·ln n (no asymptote)",
	Params: []string{"a", "b"},
	F:      func(n float64, p []float64) float64 { return p[0] + p[1]*math.Log(n) },
	Grad: func(n float64, p, g []float64) {
		g[0], g[1] = 1, math.Log(n)
	},
	Lower:     []float64{-inf, -inf},
	Upper:     []float64{inf, 0},
	Asymptote: func(p []float64) float64 { return 0 },
	NStar: func(T float64, p []float64) float64 {
		if p[1] >= 0 {
			return inf
		}
		return math.Exp((T - p[0]) / p[1])
	},
	Start: func(n, e []float64) []float64 {
		// ordinary least squares on ln n
		var sx, sy, sxx, sxy float64
		for i := range n {
			x := math.Log(n[i])
			sx += x
			sy += e[i]
			sxx += x * x
			sxy += x * e[i]
		}
		k := float64(len(n))
		b := (k*sxy - sx*sy) / (k*sxx - sx*sx)
		return []float64{(sy - b*sx) / k, b}
	},
}

// flatFamily is the constant curve err(n) = a: a holdout error that no longer falls with n.
// It competes with the falling families, so a curve that has stopped falling is called flat
// and its level (the asymptote) gets an honest interval instead of an extrapolated one.
var flatFamily = &Family{
	Name:      "flat",
	Doc:       "constant a: the error no longer falls with n",
	Params:    []string{"a"},
	F:         func(n float64, p []float64) float64 { return p[0] },
	Grad:      func(n float64, p, g []float64) { g[0] = 1 },
	Lower:     []float64{0},
	Upper:     []float64{inf},
	Asymptote: func(p []float64) float64 { return p[0] },
	NStar: func(T float64, p []float64) float64 {
		if T < p[0] {
			return inf
		}
		return 1 // every n is at or below T
	},
	Start: func(n, e []float64) []float64 {
		var s float64
		for _, v := range e {
			s += v
		}
		return []float64{s / float64(len(e))}
	},
}

// Pow3 is the inverse power law a + b·n^(−c).
func Pow3(n, a, b, c float64) float64 { return a + b*math.Pow(n, -c) }

// NStarPow3 is the n at which a + b·n^(−c) reaches T: (b/(T−a))^(1/c); +Inf when T ≤ a
// (the target lies at or below the asymptote) or b ≤ 0 (the curve does not decrease).
func NStarPow3(T, a, b, c float64) float64 {
	if T <= a || b <= 0 || c <= 0 {
		return inf
	}
	return math.Pow(b/(T-a), 1/c)
}

// NStarPow3Params is NStarPow3 with θ = (a, b, c).
func NStarPow3Params(T float64, p []float64) float64 { return NStarPow3(T, p[0], p[1], p[2]) }

// startPow3 guesses a just below the smallest mean error, then fits ln(err − a) on ln n.
func startPow3(n, e []float64) []float64 {
	lo, hi := minmax(e)
	a := math.Max(0, lo-0.25*(hi-lo))
	if len(e) >= 3 {
		// if the curve is still falling steeply at the end, the asymptote is likely lower
		k := len(e)
		d1 := e[k-2] - e[k-1]
		d0 := e[k-3] - e[k-2]
		if d0 > 0 && d1 > 0 && d1 < d0 {
			r := d1 / d0 // geometric tail: remaining drop ≈ d1·r/(1−r)
			if r < 0.95 {
				a = math.Max(0, e[k-1]-d1*r/(1-r))
			}
		}
		if a >= lo {
			a = math.Max(0, lo-0.1*(hi-lo))
		}
	}
	b, c := logLogLine(n, e, a)
	return []float64{a, b, c}
}

// logLogLine fits ln(err − a) = ln b − c·ln n by ordinary least squares over the points with
// err > a, returning (b, c) clamped to sane values.
func logLogLine(n, e []float64, a float64) (b, c float64) {
	var sx, sy, sxx, sxy, k float64
	for i := range n {
		if e[i] <= a || n[i] <= 0 {
			continue
		}
		x, y := math.Log(n[i]), math.Log(e[i]-a)
		sx += x
		sy += y
		sxx += x * x
		sxy += x * y
		k++
	}
	if k < 2 || k*sxx-sx*sx <= 0 {
		return math.Max(e[0]-a, 1e-12) * math.Sqrt(n[0]), 0.5
	}
	slope := (k*sxy - sx*sy) / (k*sxx - sx*sx)
	c = -slope
	if !(c > 0.01) {
		c = 0.01
	}
	if c > 5 {
		c = 5
	}
	b = math.Exp((sy + c*sx) / k)
	return b, c
}

func minmax(x []float64) (lo, hi float64) {
	lo, hi = inf, -inf
	for _, v := range x {
		lo = math.Min(lo, v)
		hi = math.Max(hi, v)
	}
	return lo, hi
}
