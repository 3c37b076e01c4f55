package estimate

import (
	"encoding/json"
	"math"
	"runtime"
	"slices"
	"sync"
	"sync/atomic"
)

// BandPoint is one size of a curve's pointwise confidence band: Lo and Hi are the percentile
// interval (at the result's Level) of the bootstrap refits' predicted error at N. Values
// that are not finite encode as null in JSON.
type BandPoint struct {
	N, Lo, Hi float64
}

// MarshalJSON writes {"n", "lo", "hi"}, non-finite values as null.
func (b BandPoint) MarshalJSON() ([]byte, error) {
	return json.Marshal(struct {
		N  *float64 `json:"n"`
		Lo *float64 `json:"lo"`
		Hi *float64 `json:"hi"`
	}{finitePtr(b.N), finitePtr(b.Lo), finitePtr(b.Hi)})
}

// BandPoints is how many log-spaced sizes Result.Band has.
const BandPoints = 64

// BandEnd is the right end of a result's band and of its points plot: 4× the largest
// measured size, or the planned size at when larger, or 1.2× the upper end of n*'s interval
// (at most Horizon × the largest size) when the fitted n* lies within Horizon × the data.
func BandEnd(r *Result, at float64) float64 {
	if r == nil || len(r.Sizes) == 0 {
		return math.NaN()
	}
	nMax := r.Sizes[len(r.Sizes)-1]
	end := 4 * nMax
	if at > end {
		end = at
	}
	if ns := r.NStar; ns != nil && !math.IsInf(ns.Est, 0) && !math.IsNaN(ns.Est) && ns.Est < Horizon*nMax {
		end = math.Max(end, 1.2*math.Min(ns.Hi, Horizon*nMax))
	}
	return end
}

// BandOver is the chosen curve's pointwise bootstrap band at k log-spaced sizes from a to b
// (a, b > 0; k ≥ 2), from the same bootstrap refits as r.Band (no refitting): at each size
// the percentile interval, at r.Level, of the refits' predicted errors. It returns nil when
// the refits are not at hand (no bootstrap draws, or a Result that was not made by
// Extrapolate in this process).
func (r *Result) BandOver(a, b float64, k int) []BandPoint {
	if r == nil || len(r.bootParams) == 0 || !(a > 0) || !(b >= a) || k < 2 || math.IsInf(b, 0) {
		return nil
	}
	fam, err := FamilyByName(r.Best.Family)
	if err != nil {
		return nil
	}
	out := make([]BandPoint, k)
	q := (1 - r.Level) / 2
	// sizes are independent, so they are shared out over the cores (each size's result
	// depends only on the refits: the band does not depend on scheduling)
	var next atomic.Int64
	var wg sync.WaitGroup
	for range min(runtime.GOMAXPROCS(0), k) {
		wg.Add(1)
		go func() {
			defer wg.Done()
			pred := make([]float64, 0, len(r.bootParams))
			for {
				j := int(next.Add(1) - 1)
				if j >= k {
					return
				}
				n := a * math.Pow(b/a, float64(j)/float64(k-1))
				if j == k-1 {
					n = b
				}
				pred = pred[:0]
				for _, p := range r.bootParams {
					if v := fam.F(n, p); !math.IsNaN(v) {
						pred = append(pred, v)
					}
				}
				// the percentile interval (as PercentileInterval), without its copy
				slices.Sort(pred)
				out[j] = BandPoint{N: n, Lo: quantileSorted(pred, q), Hi: quantileSorted(pred, 1-q)}
			}
		}()
	}
	wg.Wait()
	return out
}

// bandFor is the band to draw from a to b: BandOver when the refits are at hand, else the
// part of r.Band inside [a, b].
func bandFor(r *Result, a, b float64) []BandPoint {
	if bp := r.BandOver(a, b, BandPoints); bp != nil {
		return bp
	}
	var out []BandPoint
	for _, p := range r.Band {
		if p.N >= a*(1-1e-12) && p.N <= b*(1+1e-12) {
			out = append(out, p)
		}
	}
	return out
}
