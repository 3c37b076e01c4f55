package estimate

import (
	"encoding/json"
	"errors"
	"math"
)

// Point is one measured (n, error) pair: the holdout (or training, in Options.Train) error
// of a model trained on N samples, in repeat Repeat (repeats at one N are resampled together
// by the bootstrap; leave Repeat 0 when there is one measurement per size).
type Point struct {
	N      float64
	Err    float64
	Repeat int
}

// Options tune Extrapolate. nil or zero fields mean the documented defaults.
type Options struct {
	// Families to try, by name (default: all of Families: pow3, pow2, exp3, log2).
	Families []string
	// Target error T; 0 = none. n* is the n at which the chosen curve reaches T.
	Target float64
	// At is a planned training size whose expected error is reported; 0 = none.
	At float64
	// Bootstrap is the number of bootstrap refits (default 1000; each is one LM fit).
	Bootstrap int
	// Level is the confidence level of every interval (default 0.95).
	Level float64
	// Seed seeds the bootstrap (results are a pure function of points, options and seed).
	Seed uint64
	// Holdout is how many of the largest sizes the backtest holds out (default: the largest
	// quarter of the sizes, at least 1).
	Holdout int
	// Train optionally gives training-error points at the same sizes, for the
	// variance-limited (overfitting) diagnosis.
	Train []Point
	// Progress, when set, is called with (done, total) bootstrap refits.
	Progress func(done, total int64)
}

// Fit is one family fitted to the per-size mean errors.
type Fit struct {
	Family      string
	Params      []float64 // in the order of the family's Params names
	StdErr      []float64 // sqrt(diag(s²(JᵀJ)⁻¹)); NaN when there are no residual degrees of freedom
	RSS         float64   // weighted residual sum of squares over the per-size means
	AIC         float64   // m·ln(RSS/m) + 2(k+1), m sizes, k parameters
	BacktestErr float64   // mean relative error |pred−obs|/obs predicting the held-out sizes; NaN if not computable
}

// Interval is an estimate with a confidence interval. Hi (or Est) is +Inf when, in some
// bootstrap draws, the target is never reached; such values encode as null in JSON.
type Interval struct {
	Est, Lo, Hi float64
	Method      string // "bca" or "percentile"
}

// Result is the outcome of Extrapolate.
type Result struct {
	Best      Fit   // the chosen family
	Fits      []Fit // every family tried, in Options.Families order
	Asymptote Interval
	NStar     *Interval // nil when no target
	Reachable bool      // the target lies above the asymptote's interval (true when no target)
	AtErr     *Interval // nil when no At
	Verdict   string    // plain sentences for the planner
	// Added fields.
	Sizes     []float64 // distinct sizes, ascending
	MeanErr   []float64 // mean error at each size
	Repeats   []int     // measurements at each size
	Level     float64
	Bootstrap int           // refits that were used (draws whose fit failed are dropped)
	Gap       *GapDiagnosis // nil unless Options.Train was given
	Caution   string        // the planning caution every output carries
}

// GapDiagnosis describes the train–holdout gap.
type GapDiagnosis struct {
	Ratio           float64 // training error / holdout error at the largest size
	Gap             float64 // holdout − training error at the largest size
	Exponent        float64 // c in gap ≈ b·n^(−c), fitted over the sizes; NaN if not fitted
	VarianceLimited bool    // training error is far below holdout error (Ratio < 0.5; common practice, no source)
}

// Caution is attached to every estimate.
const Caution = "These are planning estimates from an extrapolation, not guarantees; defer to local rules and qualified statistical review before acting on them."

// Predict evaluates a fitted family at n (NaN for an unknown family).
func Predict(f Fit, n float64) float64 {
	fam, err := FamilyByName(f.Family)
	if err != nil || len(f.Params) != len(fam.Params) {
		return math.NaN()
	}
	return fam.F(n, f.Params)
}

// MarshalJSON writes non-finite values as null.
func (iv Interval) MarshalJSON() ([]byte, error) {
	return json.Marshal(struct {
		Est    *float64 `json:"est"`
		Lo     *float64 `json:"lo"`
		Hi     *float64 `json:"hi"`
		Method string   `json:"method"`
	}{finitePtr(iv.Est), finitePtr(iv.Lo), finitePtr(iv.Hi), iv.Method})
}

func finitePtr(v float64) *float64 {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return nil
	}
	return &v
}

// Extrapolate fits the curve families to points and extrapolates the chosen one (see the
// package documentation). nil opts means the defaults.
func Extrapolate(points []Point, opts *Options) (*Result, error) {
	return nil, errors.New("estimate: not built yet")
}
