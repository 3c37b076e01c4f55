package estimate

import (
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"runtime"
	"sort"
	"strconv"
	"strings"
	"sync"
	"sync/atomic"
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
	// Families to try, by name (default: all of Families: pow3, pow2, exp3, log2, flat).
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
	Reachable bool      // the target lies above the asymptote's interval and n* within HorizonN (true when no target)
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
	// Flat is true when the chosen family is flat: the error no longer falls with n, and the
	// asymptote is the level the measurements sit at.
	Flat bool
	// AsymptoteUnidentified is true when the data do not pin the asymptote down: its
	// interval spans more than a quarter of [0, level] (level = the fitted error at the largest
	// size), or the fitted asymptote lies below the level by more than twice the whole fall
	// measured (and by more than 5% of the level) (thresholds common practice, no source).
	AsymptoteUnidentified bool
	// AsymptoteLoAtBound is true when the interval's lower end is the constraint a ≥ 0 (at
	// least (1 − Level)/2 of the bootstrap refits put a on the bound), not an estimate.
	AsymptoteLoAtBound bool
	// HorizonN is Horizon × the largest measured size: an n* beyond it is not a meaningful
	// extrapolation.
	HorizonN float64
	// NStarBeyondHorizon is true when the fitted curve reaches the target only beyond
	// HorizonN (NStar.Est is then still the fitted value, or +Inf past MaxNStar); such a
	// target counts as not reachable with this capacity.
	NStarBeyondHorizon bool
	// Band is the pointwise bootstrap band of the chosen curve: at BandPoints log-spaced
	// sizes from the smallest measured size to BandEnd(r, Options.At), the percentile interval
	// (at Level) of the bootstrap refits' predicted error. nil when there are no bootstrap
	// refits. It is derived, so it is not stored in the database.
	Band []BandPoint
	// bootParams are the parameters of the kept bootstrap refits, in draw order, so BandOver
	// can give the band over another range without refitting (nil on a decoded Result).
	bootParams [][]float64
}

// MaxFlatDeltaAIC: the flat family is a candidate only when its AIC is within 10 of the best
// family's (ΔAIC > 10: essentially no support, Burnham & Anderson 2002, Model Selection and
// Multimodel Inference, §2.6; cited from memory).
const MaxFlatDeltaAIC = 10

// Horizon is how far beyond the largest measured size an n* is still reported as an
// estimate (1000×; common practice, no source): a learning curve fitted over a decade or two
// of sizes says nothing dependable three decades further on.
const Horizon = 1000

// GapDiagnosis describes the train–holdout gap.
type GapDiagnosis struct {
	Ratio           float64 // training error / holdout error at the largest size
	Gap             float64 // holdout − training error at the largest size
	Exponent        float64 // c in gap ≈ b·n^(−c) (OLS of ln gap on ln n); ≤ 0 when the gap does not shrink; NaN if not fitted
	VarianceLimited bool    // training error is far below holdout error at the largest size (Ratio < VarianceRatio)
	// BySize is the gap at every size with training points, ascending.
	BySize []GapAt
}

// GapAt is the train–holdout gap at one size (mean errors over the repeats).
type GapAt struct {
	N, Train, Holdout float64
	Ratio             float64 // Train / Holdout (NaN when Holdout is 0)
	VarianceLimited   bool    // Ratio < VarianceRatio
}

// VarianceRatio: training error below this fraction of holdout error counts as
// variance-limited (overfitting) (common practice, no source).
const VarianceRatio = 0.5

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

// MaxNStar is the n beyond which n* is reported as +Inf (not reached): a curve that falls so
// slowly that it meets the target only past 10^15 samples does not meet it in practice.
const MaxNStar = 1e15

// Errors Extrapolate returns for bad input (wrapped with detail).
var (
	ErrTooFewSizes = errors.New("too few distinct sizes")
	ErrBadPoint    = errors.New("bad point")
	ErrBadTarget   = errors.New("bad target")
)

// MinFitSizes is the fewest distinct sizes Extrapolate accepts: a 3-parameter family on
// 3 sizes is exactly determined, so one more is needed to see any misfit.
const MinFitSizes = 4

// curveData is the per-size summary the fits work on.
type curveData struct {
	n, e, w []float64
}

// Extrapolate fits the curve families to points and extrapolates the chosen one (see the
// package documentation). nil opts means the defaults.
func Extrapolate(points []Point, opts *Options) (*Result, error) {
	o := Options{}
	if opts != nil {
		o = *opts
	}
	if len(o.Families) == 0 {
		for _, f := range Families {
			o.Families = append(o.Families, f.Name)
		}
	}
	fams := make([]*Family, len(o.Families))
	for i, name := range o.Families {
		f, err := FamilyByName(name)
		if err != nil {
			return nil, err
		}
		fams[i] = f
	}
	if o.Bootstrap == 0 {
		o.Bootstrap = 1000
	}
	if o.Bootstrap < 0 {
		return nil, fmt.Errorf("bootstrap count %d must be positive", o.Bootstrap)
	}
	if o.Level == 0 {
		o.Level = 0.95
	}
	if !(o.Level > 0 && o.Level < 1) {
		return nil, fmt.Errorf("confidence level %g must lie in (0, 1)", o.Level)
	}
	groups, err := groupPoints(points, "point")
	if err != nil {
		return nil, err
	}
	if len(groups) < MinFitSizes {
		return nil, fmt.Errorf("%w: %d distinct sizes, need at least %d to fit and check a curve", ErrTooFewSizes, len(groups), MinFitSizes)
	}
	maxErr := 0.0
	for _, p := range points {
		maxErr = math.Max(maxErr, p.Err)
	}
	if o.Target != 0 && !(o.Target > 0 && o.Target < maxErr) {
		return nil, fmt.Errorf("%w: target %g must lie in (0, %g), the largest measured error", ErrBadTarget, o.Target, maxErr)
	}
	if o.At < 0 || math.IsNaN(o.At) || math.IsInf(o.At, 0) {
		return nil, fmt.Errorf("planned size %g must be positive", o.At)
	}
	mode := "repeats"
	for _, g := range groups {
		if len(g.errs) < 2 {
			mode = "residuals"
		}
	}
	data := summarise(groups, mode == "repeats")
	m := len(groups)
	hold := o.Holdout
	if hold == 0 {
		hold = max(1, m/4)
	}
	if hold < 0 || hold >= m {
		return nil, fmt.Errorf("holdout %d must lie in [1, %d)", hold, m)
	}

	res := &Result{Level: o.Level, Caution: Caution, Reachable: true}
	for _, g := range groups {
		res.Sizes = append(res.Sizes, g.n)
		res.Repeats = append(res.Repeats, len(g.errs))
	}
	res.MeanErr = append(res.MeanErr, data.e...)
	bestIdx := -1
	fitted := make([]bool, len(fams))
	minAIC := inf
	for i, fam := range fams {
		fit, err := fitFamily(fam, data, nil)
		if err != nil {
			fit = Fit{Family: fam.Name, Params: nanSlice(len(fam.Params)), StdErr: nanSlice(len(fam.Params)), RSS: math.NaN(), AIC: math.NaN()}
		}
		fit.BacktestErr = backtest(fam, data, hold)
		res.Fits = append(res.Fits, fit)
		fitted[i] = err == nil
		if err == nil && !math.IsNaN(fit.AIC) {
			minAIC = math.Min(minAIC, fit.AIC)
		}
	}
	// The flat family competes only while the measurements support it: an AIC more than
	// MaxFlatDeltaAIC above the best family's means the curve is still falling.
	flatOK := func(i int) bool {
		return fams[i].Name != "flat" || len(fams) == 1 || res.Fits[i].AIC <= minAIC+MaxFlatDeltaAIC
	}
	for i := range fams {
		if fitted[i] && flatOK(i) && better(res.Fits[i], res.Fits, bestIdx) {
			bestIdx = i
		}
	}
	if bestIdx < 0 {
		return nil, errors.New("no curve family could be fitted to these points")
	}
	// Parsimony: a flat curve is chosen when its backtest is within the noise of the best
	// falling family's (see flatTolerance), so noise that happens to slope does not buy a
	// falling curve with an asymptote far below the data.
	for i, f := range res.Fits {
		if fams[i].Name == "flat" && i != bestIdx && fitted[i] && flatOK(i) && !math.IsNaN(f.BacktestErr) && !math.IsNaN(res.Fits[bestIdx].BacktestErr) &&
			f.BacktestErr <= res.Fits[bestIdx].BacktestErr+flatTolerance(groups, data, hold, mode, res.Fits[bestIdx], fams[bestIdx]) {
			bestIdx = i
		}
	}
	res.Best = res.Fits[bestIdx]
	fam := fams[bestIdx]

	// statistics of one fit
	stats := func(p []float64) [3]float64 {
		s := [3]float64{fam.Asymptote(p), math.NaN(), math.NaN()}
		if o.Target > 0 {
			s[1] = solveNStar(fam, o.Target, p)
			if s[1] >= MaxNStar {
				s[1] = inf
			}
		}
		if o.At > 0 {
			s[2] = fam.F(o.At, p)
		}
		return s
	}
	est := stats(res.Best.Params)
	boot, bootParams, used := bootstrapStats(fam, groups, data, res.Best, mode, o, stats)
	jack := jackknifeStats(fam, groups, data, res.Best, mode, stats)
	res.Bootstrap = used
	iv := func(k int) Interval {
		b := make([]float64, len(boot))
		for i := range boot {
			b[i] = boot[i][k]
		}
		j := make([]float64, len(jack))
		for i := range jack {
			j[i] = jack[i][k]
		}
		return BCaInterval(est[k], b, j, o.Level)
	}
	res.Asymptote = iv(0)
	if fam.Name == "pow2" || fam.Name == "log2" {
		res.Asymptote = Interval{Method: "none"}
	}
	res.Flat = fam.Name == "flat"
	largest := res.Sizes[len(res.Sizes)-1]
	res.HorizonN = Horizon * largest
	if res.Asymptote.Method != "none" && !res.Flat {
		identify(res, fam, boot)
	}
	if o.Target > 0 {
		ns := iv(1)
		res.NStar = &ns
		raw := solveNStar(fam, o.Target, res.Best.Params)
		below := res.Asymptote.Method != "none" && o.Target <= res.Asymptote.Est
		res.NStarBeyondHorizon = !below && raw > res.HorizonN
		res.Reachable = o.Target > res.Asymptote.Hi && !math.IsInf(est[1], 1) && !res.NStarBeyondHorizon
	}
	if o.At > 0 {
		a := iv(2)
		res.AtErr = &a
	}
	if len(o.Train) > 0 {
		gd, err := gapDiagnosis(groups, o.Train)
		if err != nil {
			return nil, err
		}
		res.Gap = gd
	}
	if used > 0 {
		res.bootParams = bootParams
		res.Band = res.BandOver(res.Sizes[0], BandEnd(res, o.At), BandPoints)
	}
	res.Verdict = verdict(res, o)
	return res, nil
}

// flatTolerance is how much larger the flat family's backtest error may be than the best
// falling family's and still be preferred: twice the relative standard error of the mean
// error at the held-out sizes (variances across repeats smoothed in ln n as the fit's
// weights are; without repeats, the falling fit's residual RMS), a difference the noise
// alone can make (common practice, no source).
func flatTolerance(groups []sizeGroup, d curveData, hold int, mode string, best Fit, fam *Family) float64 {
	m := len(d.n)
	var se []float64
	if mode == "repeats" {
		vars := make([]float64, m)
		for i, g := range groups {
			R := float64(len(g.errs))
			var ss float64
			for _, v := range g.errs {
				ss += (v - d.e[i]) * (v - d.e[i])
			}
			vars[i] = ss / (R - 1) / R
		}
		if sm := smoothLogVar(d.n, vars); sm != nil {
			vars = sm
		}
		for _, v := range vars {
			se = append(se, math.Sqrt(v))
		}
	} else {
		var rss float64
		for i := range d.n {
			r := d.e[i] - fam.F(d.n[i], best.Params)
			rss += r * r
		}
		s := math.Sqrt(rss / math.Max(float64(m-len(fam.Params)), 1))
		for range d.n {
			se = append(se, s)
		}
	}
	var t float64
	for i := m - hold; i < m; i++ {
		t += se[i] / math.Max(d.e[i], 1e-12)
	}
	return 2 * t / float64(hold)
}

// identify decides whether the data pin the chosen family's asymptote down (see
// Result.AsymptoteUnidentified and AsymptoteLoAtBound).
func identify(res *Result, fam *Family, boot [][3]float64) {
	a := res.Asymptote
	p := res.Best.Params
	level := fam.F(res.Sizes[len(res.Sizes)-1], p)
	fall := fam.F(res.Sizes[0], p) - level // the fall the measurements span
	if !(level > 0) {
		return
	}
	eps := 1e-6 * level
	var at float64
	for _, b := range boot {
		if b[0] <= fam.Lower[0]+eps {
			at++
		}
	}
	if len(boot) > 0 && at/float64(len(boot)) >= (1-res.Level)/2 {
		// the draws pile up at the bound: the interval's lower end is the constraint
		a.Lo = fam.Lower[0]
		res.Asymptote.Lo = a.Lo
	}
	res.AsymptoteLoAtBound = a.Lo <= fam.Lower[0]+eps
	remaining := level - a.Est
	switch {
	case math.IsNaN(a.Lo) || math.IsNaN(a.Hi) || math.IsInf(a.Hi, 0):
		res.AsymptoteUnidentified = true
	case a.Hi-a.Lo > 0.25*level:
		res.AsymptoteUnidentified = true
	case remaining > 2*fall && remaining > 0.05*level:
		res.AsymptoteUnidentified = true
	}
}

func nanSlice(k int) []float64 {
	s := make([]float64, k)
	for i := range s {
		s[i] = math.NaN()
	}
	return s
}

// FitFamily fits one family to points exactly as Extrapolate does (per-size means, weights
// from the smoothed spread across repeats when every size has at least two), without the
// backtest; SQL's est_fit_pow3 calls it.
func FitFamily(points []Point, family string) (Fit, error) {
	fam, err := FamilyByName(family)
	if err != nil {
		return Fit{}, err
	}
	groups, err := groupPoints(points, "point")
	if err != nil {
		return Fit{}, err
	}
	if len(groups) < len(fam.Params) {
		return Fit{}, fmt.Errorf("%w: %d distinct sizes for %d parameters", ErrTooFewSizes, len(groups), len(fam.Params))
	}
	weighted := true
	for _, g := range groups {
		if len(g.errs) < 2 {
			weighted = false
		}
	}
	return fitFamily(fam, summarise(groups, weighted), nil)
}

// better reports whether fit beats fits[best]: the smaller backtest error wins; AIC decides
// when either backtest is missing or they tie.
func better(fit Fit, fits []Fit, best int) bool {
	if best < 0 {
		return true
	}
	b := fits[best]
	fb, bb := !math.IsNaN(fit.BacktestErr), !math.IsNaN(b.BacktestErr)
	switch {
	case fb && bb && fit.BacktestErr != b.BacktestErr:
		return fit.BacktestErr < b.BacktestErr
	case fb != bb:
		return fb
	}
	return fit.AIC < b.AIC
}

type sizeGroup struct {
	n    float64
	errs []float64
	reps []int
}

// groupPoints validates points and groups them by N, ascending.
func groupPoints(points []Point, what string) ([]sizeGroup, error) {
	byN := map[float64]*sizeGroup{}
	for i, p := range points {
		if !(p.N > 0) || math.IsInf(p.N, 0) {
			return nil, fmt.Errorf("%w: %s %d: n = %v must be a positive number", ErrBadPoint, what, i+1, p.N)
		}
		if math.IsNaN(p.Err) || math.IsInf(p.Err, 0) || p.Err < 0 {
			return nil, fmt.Errorf("%w: %s %d: error = %v must be a non-negative number", ErrBadPoint, what, i+1, p.Err)
		}
		g := byN[p.N]
		if g == nil {
			g = &sizeGroup{n: p.N}
			byN[p.N] = g
		}
		g.errs = append(g.errs, p.Err)
		g.reps = append(g.reps, p.Repeat)
	}
	out := make([]sizeGroup, 0, len(byN))
	for _, g := range byN {
		out = append(out, *g)
	}
	sort.Slice(out, func(i, j int) bool { return out[i].n < out[j].n })
	return out, nil
}

// summarise gives per-size means and weights 1/var(mean), the variances smoothed in ln n
// (smoothLogVar). The variance of each mean is floored at a tenth of the median one, so a size whose few repeats happen to agree does not
// dominate the fit (common practice, no source). Without repeats every weight is 1.
func summarise(groups []sizeGroup, weighted bool) curveData {
	d := curveData{n: make([]float64, len(groups)), e: make([]float64, len(groups)), w: make([]float64, len(groups))}
	vars := make([]float64, len(groups))
	for i, g := range groups {
		d.n[i] = g.n
		var s float64
		for _, v := range g.errs {
			s += v
		}
		mean := s / float64(len(g.errs))
		d.e[i] = mean
		if len(g.errs) > 1 {
			var ss float64
			for _, v := range g.errs {
				ss += (v - mean) * (v - mean)
			}
			vars[i] = ss / float64(len(g.errs)-1) / float64(len(g.errs))
		}
	}
	if !weighted {
		for i := range d.w {
			d.w[i] = 1
		}
		return d
	}
	// Variance estimates from a few repeats are noisy (a χ² with R−1 degrees of freedom), and
	// weights that chase that noise make the fit worse than unweighted: smooth ln var(mean)
	// as a straight line in ln n, the usual shape of the spread of a learning curve.
	if sm := smoothLogVar(d.n, vars); sm != nil {
		vars = sm
	}
	med := append([]float64(nil), vars...)
	sort.Float64s(med)
	floor := 0.1 * med[len(med)/2]
	if floor <= 0 {
		_, hi := minmax(d.e)
		floor = math.Max(1e-12*hi*hi, 1e-300)
	}
	var sw float64
	for i, v := range vars {
		d.w[i] = 1 / math.Max(v, floor)
		sw += d.w[i]
	}
	for i := range d.w {
		d.w[i] *= float64(len(d.w)) / sw
	}
	return d
}

// smoothLogVar fits ln v = α + β ln n by least squares over the positive variances and
// returns the fitted variances; nil when fewer than 3 are positive.
func smoothLogVar(n, v []float64) []float64 {
	var sx, sy, sxx, sxy, k float64
	for i := range n {
		if v[i] > 0 {
			x, y := math.Log(n[i]), math.Log(v[i])
			sx += x
			sy += y
			sxx += x * x
			sxy += x * y
			k++
		}
	}
	if k < 3 || k*sxx-sx*sx <= 0 {
		return nil
	}
	beta := (k*sxy - sx*sy) / (k*sxx - sx*sx)
	alpha := (sy - beta*sx) / k
	out := make([]float64, len(n))
	for i := range n {
		out[i] = math.Exp(alpha + beta*math.Log(n[i]))
	}
	return out
}

// fitFamily fits fam to the per-size means by weighted LM from several starting points
// (the family's own guess, the asymptote at 0 and at half the smallest mean error, and hint
// when given), keeping the smallest RSS.
func fitFamily(fam *Family, d curveData, hint []float64) (Fit, error) {
	k := len(fam.Params)
	if len(d.n) < k {
		return Fit{}, fmt.Errorf("%s: %d sizes for %d parameters", fam.Name, len(d.n), k)
	}
	starts := [][]float64{}
	if hint != nil {
		starts = append(starts, hint)
	}
	s0 := fam.Start(d.n, d.e)
	starts = append(starts, s0)
	if fam.Name == "pow3" || fam.Name == "exp3" {
		lo, _ := minmax(d.e)
		for _, a := range []float64{0, 0.5 * lo} {
			s := append([]float64(nil), s0...)
			s[0] = a
			if fam.Name == "pow3" {
				s[1], s[2] = logLogLine(d.n, d.e, a)
			}
			starts = append(starts, s)
		}
	}
	model := Model{F: fam.F, Grad: fam.Grad}
	var best *LSResult
	for _, s := range starts {
		r, err := LeastSquares(model, d.n, d.e, d.w, s, &LSOptions{Lower: fam.Lower, Upper: fam.Upper, MaxIter: 500, XTol: 1e-10, FTol: 1e-12})
		if r == nil || (err != nil && !errors.Is(err, ErrNoConvergence)) {
			continue
		}
		if best == nil || r.RSS < best.RSS {
			best = r
		}
		if hint != nil && err == nil {
			break // a bootstrap refit from the full fit's parameters: one start is enough
		}
	}
	if best == nil || math.IsNaN(best.RSS) {
		return Fit{}, fmt.Errorf("%s: fit failed", fam.Name)
	}
	m := float64(len(d.n))
	rss := math.Max(best.RSS, 1e-300*m)
	return Fit{
		Family: fam.Name,
		Params: best.Params,
		StdErr: best.StdErr,
		RSS:    best.RSS,
		AIC:    m*math.Log(rss/m) + 2*float64(k+1),
	}, nil
}

// backtest refits on all but the hold largest sizes and returns the mean relative error of
// predicting them; NaN when too few sizes remain to fit the family.
func backtest(fam *Family, d curveData, hold int) float64 {
	m := len(d.n)
	keep := m - hold
	if keep < len(fam.Params) || keep < 2 {
		return math.NaN()
	}
	sub := curveData{n: d.n[:keep], e: d.e[:keep], w: d.w[:keep]}
	fit, err := fitFamily(fam, sub, nil)
	if err != nil {
		return math.NaN()
	}
	var s float64
	for i := keep; i < m; i++ {
		pred := fam.F(d.n[i], fit.Params)
		s += math.Abs(pred-d.e[i]) / math.Max(math.Abs(d.e[i]), 1e-12)
	}
	return s / float64(hold)
}

// solveNStar is n* for the family: its closed form, or bisection on ln n when it has none.
func solveNStar(fam *Family, T float64, p []float64) float64 {
	if fam.NStar != nil {
		return fam.NStar(T, p)
	}
	return NStarNumeric(func(n float64) float64 { return fam.F(n, p) }, T)
}

// NStarNumeric finds the smallest n ≥ 1 with f(n) ≤ T for a decreasing curve f, by
// bracketing on a doubling grid up to 10^15 and then bisecting ln n to 1e-12 relative; +Inf
// when f stays above T.
func NStarNumeric(f func(n float64) float64, T float64) float64 {
	lo := 1.0
	if f(lo) <= T {
		return lo
	}
	hi := 2.0
	for f(hi) > T {
		lo = hi
		hi *= 2
		if hi > 1e15 {
			return inf
		}
	}
	a, b := math.Log(lo), math.Log(hi)
	for i := 0; i < 200 && b-a > 1e-13*math.Max(1, math.Abs(b)); i++ {
		mid := 0.5 * (a + b)
		if f(math.Exp(mid)) > T {
			a = mid
		} else {
			b = mid
		}
	}
	return math.Exp(b)
}

// bootstrapStats refits the chosen family on B resamples: over repeats within each size
// when every size has at least two (mode "repeats"; deviations from the size's mean inflated
// by sqrt(R/(R−1)), Davison & Hinkley 1997, Bootstrap Methods, §3.2), otherwise over the fit's weighted
// residuals, inflated by sqrt(m/(m−k)) for the degrees of freedom the fit used. Draws run in
// parallel; each draw has its own PCG stream (seed, draw), so results do not depend on
// scheduling. Draws whose refit fails are dropped. It returns the statistics and the
// parameters of the kept draws, in draw order, and how many were kept.
func bootstrapStats(fam *Family, groups []sizeGroup, d curveData, best Fit, mode string, o Options, stats func([]float64) [3]float64) ([][3]float64, [][]float64, int) {
	B := o.Bootstrap
	out := make([][3]float64, B)
	params := make([][]float64, B)
	okv := make([]bool, B)
	m := len(d.n)
	k := len(fam.Params)
	var resid []float64
	if mode == "residuals" {
		infl := math.Sqrt(float64(m) / math.Max(float64(m-k), 1))
		for i := range d.n {
			resid = append(resid, math.Sqrt(d.w[i])*(d.e[i]-fam.F(d.n[i], best.Params))*infl)
		}
	}
	var done atomic.Int64
	workers := runtime.GOMAXPROCS(0)
	var wg sync.WaitGroup
	next := atomic.Int64{}
	for wkr := 0; wkr < workers; wkr++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for {
				b := int(next.Add(1) - 1)
				if b >= B {
					return
				}
				rng := rand.New(rand.NewPCG(o.Seed, uint64(b)+1))
				var dd curveData
				if mode == "repeats" {
					gs := make([]sizeGroup, len(groups))
					for i, g := range groups {
						// resampled deviations are scaled by sqrt(R/(R−1)) so the resampled
						// mean has the unbiased variance s²/R, not ((R−1)/R)·s²/R
						e := make([]float64, len(g.errs))
						R := float64(len(g.errs))
						infl := math.Sqrt(R / (R - 1))
						for j := range e {
							e[j] = d.e[i] + infl*(g.errs[rng.IntN(len(g.errs))]-d.e[i])
						}
						gs[i] = sizeGroup{n: g.n, errs: e}
					}
					dd = summarise(gs, true)
				} else {
					dd = curveData{n: d.n, e: make([]float64, m), w: d.w}
					for i := range dd.e {
						dd.e[i] = fam.F(d.n[i], best.Params) + resid[rng.IntN(m)]/math.Sqrt(d.w[i])
					}
				}
				fit, err := fitFamily(fam, dd, best.Params)
				if err == nil {
					out[b] = stats(fit.Params)
					params[b] = fit.Params
					okv[b] = true
				}
				if o.Progress != nil {
					o.Progress(done.Add(1), int64(B))
				}
			}
		}()
	}
	wg.Wait()
	kept := out[:0]
	keptParams := params[:0]
	for b := range out {
		if okv[b] {
			kept = append(kept, out[b])
			keptParams = append(keptParams, params[b])
		}
	}
	return kept, keptParams, len(kept)
}

// jackknifeStats recomputes the statistics leaving out one measurement at a time (mode
// "repeats") or one size at a time (mode "residuals"), for the BCa acceleration.
func jackknifeStats(fam *Family, groups []sizeGroup, d curveData, best Fit, mode string, stats func([]float64) [3]float64) [][3]float64 {
	var out [][3]float64
	if mode == "repeats" {
		for i, g := range groups {
			for j := range g.errs {
				gs := make([]sizeGroup, len(groups))
				copy(gs, groups)
				e := make([]float64, 0, len(g.errs)-1)
				e = append(e, g.errs[:j]...)
				e = append(e, g.errs[j+1:]...)
				gs[i] = sizeGroup{n: g.n, errs: e}
				fit, err := fitFamily(fam, summarise(gs, len(e) > 1), best.Params)
				if err != nil {
					return nil
				}
				out = append(out, stats(fit.Params))
			}
		}
		return out
	}
	for i := range d.n {
		dd := curveData{}
		for j := range d.n {
			if j != i {
				dd.n = append(dd.n, d.n[j])
				dd.e = append(dd.e, d.e[j])
				dd.w = append(dd.w, d.w[j])
			}
		}
		fit, err := fitFamily(fam, dd, best.Params)
		if err != nil {
			return nil
		}
		out = append(out, stats(fit.Params))
	}
	return out
}

// gapDiagnosis compares training and holdout error by size.
func gapDiagnosis(groups []sizeGroup, train []Point) (*GapDiagnosis, error) {
	tg, err := groupPoints(train, "training point")
	if err != nil {
		return nil, err
	}
	tmean := map[float64]float64{}
	for _, g := range tg {
		var s float64
		for _, v := range g.errs {
			s += v
		}
		tmean[g.n] = s / float64(len(g.errs))
	}
	var ns, gaps []float64
	gd := &GapDiagnosis{Ratio: math.NaN(), Gap: math.NaN(), Exponent: math.NaN()}
	for _, g := range groups {
		tm, ok := tmean[g.n]
		if !ok {
			continue
		}
		var s float64
		for _, v := range g.errs {
			s += v
		}
		hm := s / float64(len(g.errs))
		gd.Gap = hm - tm
		gd.Ratio = math.NaN()
		if hm > 0 {
			gd.Ratio = tm / hm
		}
		gd.BySize = append(gd.BySize, GapAt{N: g.n, Train: tm, Holdout: hm, Ratio: gd.Ratio, VarianceLimited: gd.Ratio < VarianceRatio})
		if hm-tm > 0 {
			ns = append(ns, g.n)
			gaps = append(gaps, hm-tm)
		}
	}
	if math.IsNaN(gd.Gap) {
		return nil, fmt.Errorf("%w: no training point shares a size with the holdout points", ErrBadPoint)
	}
	if len(ns) >= 2 {
		// ordinary least squares of ln gap on ln n; a non-negative slope means the gap is
		// not shrinking (Exponent ≤ 0)
		var sx, sy, sxx, sxy float64
		k := float64(len(ns))
		for i := range ns {
			x, y := math.Log(ns[i]), math.Log(gaps[i])
			sx += x
			sy += y
			sxx += x * x
			sxy += x * y
		}
		if den := k*sxx - sx*sx; den > 0 {
			gd.Exponent = -(k*sxy - sx*sy) / den
		}
	}
	gd.VarianceLimited = gd.Ratio < VarianceRatio
	return gd, nil
}

// verdict writes the planner's answer in plain sentences.
func verdict(r *Result, o Options) string {
	var b strings.Builder
	pct := fmt.Sprintf("%g%%", 100*r.Level)
	largest := r.Sizes[len(r.Sizes)-1]
	fmt.Fprintf(&b, "Best curve: %s (%s)", r.Best.Family, familyDoc(r.Best.Family))
	if !math.IsNaN(r.Best.BacktestErr) {
		fmt.Fprintf(&b, "; refitted without the largest sizes it predicted them within %.1f%% on average (backtest)", 100*r.Best.BacktestErr)
	}
	b.WriteString(".")
	switch {
	case r.Flat:
		fmt.Fprintf(&b, " The holdout error no longer falls with n over the measured sizes: it stays at about %s (%s interval %s to %s), and more data of the same kind is not expected to lower it.", num(r.Asymptote.Est), pct, num(r.Asymptote.Lo), num(r.Asymptote.Hi))
	case r.Asymptote.Method != "none" && r.AsymptoteUnidentified:
		fmt.Fprintf(&b, " Its asymptote, the error more data cannot remove, is not identified by these data: the %s interval runs from %s to %s, so the measured sizes do not show where the curve levels off.", pct, AsymptoteLoString(r), num(r.Asymptote.Hi))
	case r.Asymptote.Method != "none":
		fmt.Fprintf(&b, " Its asymptote, the error more data cannot remove, is %s (%s interval %s to %s).", num(r.Asymptote.Est), pct, AsymptoteLoString(r), num(r.Asymptote.Hi))
	}
	if r.NStar != nil {
		T := o.Target
		switch {
		case r.Flat && T < r.Asymptote.Est:
			fmt.Fprintf(&b, " The target %s is below that level: not reachable with this capacity; more data will not get there, more capacity might.", num(T))
		case r.Flat:
			fmt.Fprintf(&b, " The target %s is at or above that level: the measured sizes already meet it on average.", num(T))
		case r.AsymptoteUnidentified && !r.Reachable:
			fmt.Fprintf(&b, " Whether the target %s can be reached with this capacity is not settled by these sizes (%s); measure at larger sizes, or try more capacity, before planning on it.", num(T), fittedAlone(r))
		case T <= r.Asymptote.Est && r.Asymptote.Method != "none":
			fmt.Fprintf(&b, " The target %s is at or below the asymptote: not reachable with this capacity; more data will not get there, more capacity might.", num(T))
		case r.NStarBeyondHorizon || math.IsInf(r.NStar.Est, 1):
			fmt.Fprintf(&b, " The fitted curve would reach the target %s only beyond %g× the largest measured size (%s samples), which is not a meaningful extrapolation: in practice not reachable with this capacity; more data will not get there, more capacity might.", num(T), float64(Horizon), sizeNum(math.Round(r.HorizonN)))
		case !r.Reachable:
			fmt.Fprintf(&b, " The target %s lies within the asymptote's interval: it may not be reachable with this capacity (the point estimate is n* ≈ %s, upper bound %s); more capacity might be needed.", num(T), sizeNum(r.NStar.Est), nstarPhrase(r, r.NStar.Hi))
		case r.NStar.Est <= largest:
			fmt.Fprintf(&b, " The fitted curve already reaches the target %s within the measured sizes, at n* ≈ %s (%s interval %s to %s).", num(T), sizeNum(r.NStar.Est), pct, sizeNum(r.NStar.Lo), nstarPhrase(r, r.NStar.Hi))
		default:
			fmt.Fprintf(&b, " The curve reaches the target %s at n* ≈ %s (%s interval %s to %s), %.2g× the largest measured size.", num(T), sizeNum(r.NStar.Est), pct, sizeNum(r.NStar.Lo), nstarPhrase(r, r.NStar.Hi), r.NStar.Est/largest)
			if r.AsymptoteUnidentified {
				b.WriteString(" With the asymptote not identified, this n* assumes the measured trend goes on.")
			}
			if r.NStar.Est > 10*largest {
				b.WriteString(" That is far beyond the measured sizes: treat it as a rough guide.")
			}
		}
	}
	if r.AtErr != nil {
		fmt.Fprintf(&b, " At n = %s the expected error is %s (%s interval %s to %s).", sizeNum(o.At), num(r.AtErr.Est), pct, num(r.AtErr.Lo), num(r.AtErr.Hi))
		if o.At > r.HorizonN {
			fmt.Fprintf(&b, " That size is beyond %g× the largest measured one: not a meaningful extrapolation.", float64(Horizon))
		}
	}
	if g := r.Gap; g != nil {
		b.WriteString(gapSentences(g, r.NStar != nil && !r.Reachable))
	}
	b.WriteString(" " + Caution)
	return b.String()
}

// gapSentences describes the train–holdout gap size by size: where training error is far
// below holdout error (variance-limited) and how the gap shrinks with n.
func gapSentences(g *GapDiagnosis, unreachable bool) string {
	var b strings.Builder
	var vl []string
	for _, s := range g.BySize {
		if s.VarianceLimited {
			vl = append(vl, fmt.Sprintf("n = %s (%.0f%%)", sizeNum(s.N), 100*s.Ratio))
		}
	}
	shrink := ""
	if k := len(g.BySize); k >= 2 {
		f, l := g.BySize[0], g.BySize[k-1]
		shrink = fmt.Sprintf("the gap (holdout − training error) goes from %s at n = %s to %s at n = %s", num(f.Holdout-f.Train), sizeNum(f.N), num(l.Holdout-l.Train), sizeNum(l.N))
		if !math.IsNaN(g.Exponent) && g.Exponent > 0 {
			shrink += fmt.Sprintf(", shrinking about as n^(−%.2g)", g.Exponent)
		} else if !math.IsNaN(g.Exponent) {
			shrink += ", not shrinking over the measured sizes"
		}
	}
	switch {
	case g.VarianceLimited:
		fmt.Fprintf(&b, " Training error is %.0f%% of holdout error at the largest size: the model is variance-limited (overfitting)", 100*g.Ratio)
		switch {
		case len(vl) > 1 && len(vl) == len(g.BySize):
			fmt.Fprintf(&b, ", as at every measured size (%.0f%% at n = %s)", 100*g.BySize[0].Ratio, sizeNum(g.BySize[0].N))
		case len(vl) > 1:
			fmt.Fprintf(&b, ", as where training error is under half the holdout error at %s", strings.Join(vl, ", "))
		}
		if shrink != "" {
			b.WriteString("; " + shrink)
		}
		switch {
		case !math.IsNaN(g.Exponent) && g.Exponent > 0:
			b.WriteString(", so more data helps, and so would less capacity or more regularisation.")
		case !math.IsNaN(g.Exponent):
			b.WriteString(", so less capacity or more regularisation is the first remedy.")
		default:
			b.WriteString("; more data, less capacity or more regularisation would help.")
		}
	case len(vl) > 0:
		fmt.Fprintf(&b, " Training error is under half the holdout error at %s: variance-limited (overfitting) there", strings.Join(vl, ", "))
		if shrink != "" {
			b.WriteString("; " + shrink)
		}
		fmt.Fprintf(&b, "; at the largest size training error is %.0f%% of holdout error, so there the gap no longer dominates", 100*g.Ratio)
		if unreachable {
			b.WriteString(" and the model is bias-limited (underfitting).")
		} else {
			b.WriteString(".")
		}
	case unreachable:
		fmt.Fprintf(&b, " Training error is close to holdout error at every measured size (%.0f%% at the largest): the model is bias-limited (underfitting).", 100*g.Ratio)
	}
	return b.String()
}

// fittedAlone says what the fitted curve by itself would give for n*, marked as undependable.
func fittedAlone(r *Result) string {
	v := r.NStar.Est
	switch {
	case math.IsInf(v, 1) && !(r.HorizonN > 0 && !r.NStarBeyondHorizon):
		return "the fitted curve alone does not reach it within any meaningful extrapolation"
	case math.IsInf(v, 1):
		return fmt.Sprintf("the fitted curve alone levels off at %s, above it", num(r.Asymptote.Est))
	case v > r.HorizonN:
		return fmt.Sprintf("the fitted curve alone puts n* beyond %g× the data, not a dependable figure", float64(Horizon))
	}
	return fmt.Sprintf("the fitted curve alone puts n* at %s, not a dependable figure", sizeNum(v))
}

// AsymptoteLoString prints the lower end of the asymptote's interval, "0 (bound)" when it is
// the constraint a ≥ 0 rather than an estimate.
func AsymptoteLoString(r *Result) string {
	if r.AsymptoteLoAtBound {
		return num(math.Max(r.Asymptote.Lo, 0)) + " (bound)"
	}
	return num(r.Asymptote.Lo)
}

// NStarString prints an n* (or an end of its interval) for people: the size rounded up, or
// "beyond 1000× the data" past the result's horizon.
func NStarString(r *Result, v float64) string { return nstarPhrase(r, v) }

// NStarSummary is the n* cell of a table: "not reachable" for a target at or below the
// asymptote (or a flat curve's level), "not settled" when the asymptote is not identified,
// "beyond 1000× the data" past the horizon, else n* [lo, hi].
func NStarSummary(r *Result, target float64) string {
	iv := r.NStar
	switch {
	case iv == nil:
		return ""
	case r.AsymptoteUnidentified && !r.Reachable:
		return "not settled (asymptote not identified)"
	case r.Flat && target < r.Asymptote.Est:
		return "not reachable (below the flat level)"
	case r.Asymptote.Method != "none" && target <= r.Asymptote.Est && math.IsInf(iv.Est, 1):
		return "not reachable (at or below the asymptote)"
	case r.NStarBeyondHorizon:
		return fmt.Sprintf("beyond %g× the data (not a meaningful extrapolation)", float64(Horizon))
	}
	return fmt.Sprintf("%s [%s, %s]", nstarPhrase(r, iv.Est), nstarPhrase(r, iv.Lo), nstarPhrase(r, iv.Hi))
}

func nstarPhrase(r *Result, v float64) string {
	if r != nil && r.HorizonN > 0 && v > r.HorizonN && !math.IsNaN(v) && !math.IsInf(v, 1) {
		return fmt.Sprintf("beyond %g× the data", float64(Horizon))
	}
	return sizeNum(v)
}

func familyDoc(name string) string {
	f, err := FamilyByName(name)
	if err != nil {
		return ""
	}
	return f.Doc
}

// SizeString prints a training size rounded up to a whole number ("unbounded" for +Inf).
func SizeString(v float64) string { return sizeNum(v) }

func sizeNum(v float64) string {
	switch {
	case math.IsInf(v, 1) || v >= 1e15:
		return "unbounded"
	case math.IsNaN(v):
		return "n/a"
	}
	return strconv.FormatFloat(math.Ceil(v), 'f', 0, 64)
}

// num prints a value with 4 significant digits ("unbounded" for +Inf).
func num(v float64) string {
	switch {
	case math.IsInf(v, 1):
		return "unbounded"
	case math.IsNaN(v):
		return "n/a"
	}
	return strconv.FormatFloat(v, 'g', 4, 64)
}
