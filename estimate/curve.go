package estimate

// Measured learning curves: train a model of each capacity on nested random subsets of the
// training side at growing sizes, R times with different seeded subsets, and record training
// and holdout error for every (capacity, size, repeat).

import (
	"context"
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"runtime"
	"sort"
	"strconv"
	"strings"
	"sync"
)

// Models lists the built-in model names, and Metrics the error metrics.
var (
	Models  = []string{"ridge", "logistic", "knn"}
	Metrics = []string{"mse", "rmse", "mae", "error", "logloss", "auc"}
)

// MinSizes is the fewest distinct training sizes a curve may have: a three-parameter curve
// needs more points than parameters, and the backtest holds some out (common practice, no
// source).
const MinSizes = 4

// ClassificationMetric reports whether metric scores a 0/1 label by a probability.
func ClassificationMetric(metric string) bool {
	return metric == "error" || metric == "logloss" || metric == "auc"
}

// CurveOptions configures MeasureCurves. Zero values mean the documented defaults.
type CurveOptions struct {
	Model string // ridge (default), logistic or knn
	// Capacities are the knob values: polynomial degrees for ridge and logistic, the number of
	// neighbours k for knn (capacity 1/k: a smaller k is a more flexible model). Required.
	Capacities []float64
	Sizes      []int  // training sizes, increasing; nil → AutoSizes
	Repeats    int    // seeded subsets per size; 0 → 5
	Metric     string // "" → mse for ridge and knn, error for logistic
	Seed       uint64 // repeat r's subsets come from PCG(Seed, r)
	Ridge      float64
	L2         float64
	// Progress, when set, is called with (done, total) work items.
	Progress func(done, total int64)
}

// CurvePoint is one measurement: a model of capacity Capacity (degree, or k for knn) trained
// on the first Size rows of repeat Repeat's permutation of the training side.
type CurvePoint struct {
	Capacity   float64
	Size       int
	Repeat     int
	TrainErr   float64
	HoldoutErr float64
}

// resolve fills defaults and validates options against the training side.
func (o CurveOptions) resolve(train, holdout Data) (CurveOptions, error) {
	if o.Model == "" {
		o.Model = "ridge"
	}
	if !contains(Models, o.Model) {
		return o, fmt.Errorf("model %q: not one of ridge, logistic, knn", o.Model)
	}
	if o.Metric == "" {
		o.Metric = "mse"
		if o.Model == "logistic" {
			o.Metric = "error"
		}
	}
	if !contains(Metrics, o.Metric) {
		return o, fmt.Errorf("metric %q: not one of %v", o.Metric, Metrics)
	}
	if o.Model == "logistic" && !ClassificationMetric(o.Metric) {
		return o, fmt.Errorf("metric %s: logistic regression is scored by error, logloss or auc", o.Metric)
	}
	if o.Model == "ridge" && ClassificationMetric(o.Metric) {
		return o, fmt.Errorf("metric %s: ridge regression is scored by mse, rmse or mae (use --model logistic or knn for a 0/1 label)", o.Metric)
	}
	if o.Repeats == 0 {
		o.Repeats = 5
	}
	if o.Repeats < 1 {
		return o, fmt.Errorf("repeats %d: must be at least 1", o.Repeats)
	}
	if len(o.Capacities) == 0 {
		return o, errors.New("capacities: at least one is needed")
	}
	caps := append([]float64(nil), o.Capacities...)
	sort.Float64s(caps)
	for i, c := range caps {
		if c != math.Trunc(c) || c < 0 || (o.Model == "knn" && c < 1) {
			if o.Model == "knn" {
				return o, fmt.Errorf("capacity %v: knn takes whole numbers of neighbours k ≥ 1", c)
			}
			return o, fmt.Errorf("capacity %v: a polynomial degree is a whole number ≥ 0", c)
		}
		if i > 0 && c == caps[i-1] {
			return o, fmt.Errorf("capacity %v: listed twice", c)
		}
	}
	o.Capacities = caps
	if err := train.check("training side"); err != nil {
		return o, err
	}
	if err := holdout.check("holdout side"); err != nil {
		return o, err
	}
	if train.P != holdout.P {
		return o, fmt.Errorf("training side has %d features, holdout %d", train.P, holdout.P)
	}
	if ClassificationMetric(o.Metric) {
		if err := checkBinary(train); err != nil {
			return o, fmt.Errorf("training side: %w", err)
		}
		for i, v := range holdout.Y {
			if v != 0 && v != 1 {
				return o, fmt.Errorf("holdout side %s: label %v is not 0 or 1", holdout.where(i), v)
			}
		}
	} else if constant(train.Y) {
		return o, fmt.Errorf("training side: label is constant (%v): there is nothing to learn", train.Y[0])
	}
	maxCap := int(caps[len(caps)-1])
	params := maxCap
	if o.Model != "knn" {
		b, err := newPolyBasis(train.P, maxCap, train.Groups)
		if err != nil {
			return o, err
		}
		params = b.Terms(maxCap)
	}
	if o.Sizes == nil {
		s, err := AutoSizes(train.N, params, 8)
		if err != nil {
			return o, err
		}
		o.Sizes = s
	}
	if len(o.Sizes) < MinSizes {
		return o, fmt.Errorf("sizes: %d given, a curve needs at least %d", len(o.Sizes), MinSizes)
	}
	for i, n := range o.Sizes {
		if n < 2 || n > train.N {
			return o, fmt.Errorf("size %d: must be between 2 and the training side's %d rows", n, train.N)
		}
		if i > 0 && n <= o.Sizes[i-1] {
			return o, fmt.Errorf("sizes: %d after %d, must increase", n, o.Sizes[i-1])
		}
		if o.Model == "knn" && n < maxCap {
			return o, fmt.Errorf("size %d: smaller than k = %d", n, maxCap)
		}
	}
	return o, nil
}

// AutoSizes returns count training sizes, geometrically spaced from a small n to the whole
// training side: the small n is max(30, 2·params), params being the largest model's number of
// coefficients (or k for knn), so the smallest fit still has twice as many rows as
// coefficients (common practice, no source).
func AutoSizes(n, params, count int) ([]int, error) {
	lo := max(30, 2*params)
	if lo*4 > n {
		return nil, fmt.Errorf("training side: %d rows is too few for automatic sizes from %d (2 × %d coefficients) to the whole side; give --sizes or lower the capacity", n, lo, params)
	}
	var out []int
	for i := 0; i < count; i++ {
		v := int(math.Round(float64(lo) * math.Pow(float64(n)/float64(lo), float64(i)/float64(count-1))))
		if len(out) == 0 || v > out[len(out)-1] {
			out = append(out, v)
		}
	}
	out[len(out)-1] = n
	return out, nil
}

func contains(list []string, s string) bool {
	for _, v := range list {
		if v == s {
			return true
		}
	}
	return false
}

func constant(y []float64) bool {
	for _, v := range y[1:] {
		if v != y[0] {
			return false
		}
	}
	return true
}

// Metric scores predictions pred of labels y. For regression metrics pred is the prediction;
// for classification metrics it is P(label = 1). error is the misclassification rate at 0.5
// (a probability of exactly 0.5 predicts 0); logloss clips probabilities to [1e-15, 1−1e-15];
// auc returns 1 − AUC (the Mann–Whitney statistic with ties counted one half), so every metric
// falls as the model improves.
func Metric(name string, y, pred []float64) (float64, error) {
	n := float64(len(y))
	if len(y) == 0 || len(pred) != len(y) {
		return 0, fmt.Errorf("metric %s: %d labels, %d predictions", name, len(y), len(pred))
	}
	var s float64
	switch name {
	case "mse", "rmse":
		for i := range y {
			e := y[i] - pred[i]
			s += e * e
		}
		s /= n
		if name == "rmse" {
			s = math.Sqrt(s)
		}
		return s, nil
	case "mae":
		for i := range y {
			s += math.Abs(y[i] - pred[i])
		}
		return s / n, nil
	case "error":
		for i := range y {
			c := 0.0
			if pred[i] > 0.5 {
				c = 1
			}
			if c != y[i] {
				s++
			}
		}
		return s / n, nil
	case "logloss":
		for i := range y {
			p := math.Min(math.Max(pred[i], 1e-15), 1-1e-15)
			if y[i] == 1 {
				s -= math.Log(p)
			} else {
				s -= math.Log1p(-p)
			}
		}
		return s / n, nil
	case "auc":
		a, err := AUC(y, pred)
		if err != nil {
			return 0, err
		}
		return 1 - a, nil
	}
	return 0, fmt.Errorf("metric %q: unknown", name)
}

// AUC is the area under the ROC curve: the probability that a random positive scores above a
// random negative, ties one half (Mann–Whitney U / (n₁n₀); Hanley & McNeil 1982).
func AUC(y, score []float64) (float64, error) {
	idx := make([]int, len(y))
	for i := range idx {
		idx[i] = i
	}
	sort.Slice(idx, func(a, b int) bool { return score[idx[a]] < score[idx[b]] })
	var rankSum, n1 float64
	for i := 0; i < len(idx); {
		j := i
		for j < len(idx) && score[idx[j]] == score[idx[i]] {
			j++
		}
		avg := float64(i+j+1) / 2 // ranks i+1..j
		for k := i; k < j; k++ {
			if y[idx[k]] == 1 {
				rankSum += avg
				n1++
			}
		}
		i = j
	}
	n0 := float64(len(y)) - n1
	if n1 == 0 || n0 == 0 {
		return 0, errors.New("auc: the labels need both classes")
	}
	return (rankSum - n1*(n1+1)/2) / (n1 * n0), nil
}

// permutation returns repeat r's seeded ordering of n training rows; the first Size rows of
// it are the training subset at that size, so subsets are nested.
func permutation(seed uint64, r, n int) []int {
	return rand.New(rand.NewPCG(seed, 0x5eed0000+uint64(r))).Perm(n)
}

// MeasureCurves reports mistakes in opts or data (too few sizes, a constant label, ...) as
// errors matching ErrInput.
//
// MeasureCurves trains the model at every capacity on nested seeded subsets of train and
// scores it on the subset (training error) and on holdout (holdout error). Features are
// standardised with the whole training side's mean and standard deviation (so every subset
// sees the same features; the holdout side contributes nothing). Ridge uses the one-pass sweep
// (sweep.go); logistic and knn fit every (capacity, size, repeat). Work runs on all cores;
// the result is sorted by capacity, size, repeat and does not depend on the number of cores.
func MeasureCurves(ctx context.Context, train, holdout Data, opts *CurveOptions) ([]CurvePoint, error) {
	if opts == nil {
		opts = &CurveOptions{}
	}
	o, err := opts.resolve(train, holdout)
	if err != nil {
		return nil, inputError{err}
	}
	var pts []CurvePoint
	switch o.Model {
	case "ridge":
		degs := make([]int, len(o.Capacities))
		for i, c := range o.Capacities {
			degs[i] = int(c)
		}
		pts, err = sweepRidge(ctx, train, holdout, degs, o)
	case "logistic":
		pts, err = curvesLogistic(ctx, train, holdout, o)
	case "knn":
		pts, err = curvesKNN(ctx, train, holdout, o)
	}
	if err != nil {
		return nil, err
	}
	sort.Slice(pts, func(i, j int) bool {
		a, b := pts[i], pts[j]
		if a.Capacity != b.Capacity {
			return a.Capacity < b.Capacity
		}
		if a.Size != b.Size {
			return a.Size < b.Size
		}
		return a.Repeat < b.Repeat
	})
	return pts, nil
}

// parallel runs work(i) for i in [0, n) on GOMAXPROCS goroutines, stopping at the first error
// or when ctx is done; progress (if set) sees each completed item.
func parallel(ctx context.Context, n int, progress func(done, total int64), work func(i int) error) error {
	workers := min(runtime.GOMAXPROCS(0), n)
	var (
		mu   sync.Mutex
		next int
		done int64
		ferr error
		wg   sync.WaitGroup
	)
	for w := 0; w < workers; w++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for {
				mu.Lock()
				if ferr != nil || next >= n {
					mu.Unlock()
					return
				}
				if err := ctx.Err(); err != nil {
					ferr = err
					mu.Unlock()
					return
				}
				i := next
				next++
				mu.Unlock()
				err := work(i)
				mu.Lock()
				if err != nil && ferr == nil {
					ferr = err
				}
				done++
				if progress != nil {
					progress(done, int64(n))
				}
				mu.Unlock()
			}
		}()
	}
	wg.Wait()
	return ferr
}

// standardised returns d's features standardised with sc (a new matrix).
func standardised(d Data, sc scaler) []float64 {
	z := make([]float64, len(d.X))
	for i := 0; i < d.N; i++ {
		sc.apply(d.Row(i), z[i*d.P:(i+1)*d.P])
	}
	return z
}

// expandAll expands standardised rows z (n×p) to the first m terms of basis.
func expandAll(z []float64, n, p int, basis *polyBasis, m int) []float64 {
	out := make([]float64, n*m)
	full := make([]float64, basis.Terms(basis.Deg))
	for i := 0; i < n; i++ {
		basis.expand(z[i*p:(i+1)*p], full)
		copy(out[i*m:(i+1)*m], full[:m])
	}
	return out
}

func curvesLogistic(ctx context.Context, train, holdout Data, o CurveOptions) ([]CurvePoint, error) {
	maxDeg := int(o.Capacities[len(o.Capacities)-1])
	basis, err := newPolyBasis(train.P, maxDeg, train.Groups)
	if err != nil {
		return nil, err
	}
	sc := newScaler(train)
	mFull := basis.Terms(maxDeg)
	if mb := float64((train.N+holdout.N)*mFull*8) / (1 << 20); mb > maxSweepMB {
		return nil, inputf("logistic degree %d over %d features has %d terms: the expanded rows would take %.0f MB (limit %d); lower the capacity", maxDeg, train.P, mFull, mb, maxSweepMB)
	}
	trainX := expandAll(standardised(train, sc), train.N, train.P, basis, mFull)
	holdX := expandAll(standardised(holdout, sc), holdout.N, holdout.P, basis, mFull)
	lambda := l2Lambda(o.L2)
	perms := make([][]int, o.Repeats)
	for r := range perms {
		perms[r] = permutation(o.Seed, r, train.N)
	}
	type item struct{ r, k, c int }
	var items []item
	for r := 0; r < o.Repeats; r++ {
		for k := range o.Sizes {
			for c := range o.Capacities {
				items = append(items, item{r, k, c})
			}
		}
	}
	pts := make([]CurvePoint, len(items))
	err = parallel(ctx, len(items), o.Progress, func(i int) error {
		it := items[i]
		n := o.Sizes[it.k]
		deg := int(o.Capacities[it.c])
		m := basis.Terms(deg)
		a := make([]float64, n*m)
		y := make([]float64, n)
		for row, src := range perms[it.r][:n] {
			copy(a[row*m:(row+1)*m], trainX[src*mFull:src*mFull+m])
			y[row] = train.Y[src]
		}
		if err := checkBinary(Data{Y: y}); err != nil {
			return inputf("repeat %d size %d: %v; use larger sizes", it.r+1, n, err)
		}
		beta, _, err := IRLS(a, y, n, m, lambda)
		if err != nil {
			return fmt.Errorf("logistic degree %d, size %d: %w", deg, n, err)
		}
		ptr := make([]float64, n)
		for row := 0; row < n; row++ {
			ptr[row] = sigmoid(dot(beta, a[row*m:(row+1)*m]))
		}
		ph := make([]float64, holdout.N)
		for row := 0; row < holdout.N; row++ {
			ph[row] = sigmoid(dot(beta, holdX[row*mFull:row*mFull+m]))
		}
		te, err := Metric(o.Metric, y, ptr)
		if err != nil {
			return err
		}
		he, err := Metric(o.Metric, holdout.Y, ph)
		if err != nil {
			return err
		}
		pts[i] = CurvePoint{Capacity: o.Capacities[it.c], Size: n, Repeat: it.r + 1, TrainErr: te, HoldoutErr: he}
		return nil
	})
	return pts, err
}

func curvesKNN(ctx context.Context, train, holdout Data, o CurveOptions) ([]CurvePoint, error) {
	sc := newScaler(train)
	zt := standardised(train, sc)
	zh := standardised(holdout, sc)
	kmax := int(o.Capacities[len(o.Capacities)-1])
	perms := make([][]int, o.Repeats)
	for r := range perms {
		perms[r] = permutation(o.Seed, r, train.N)
	}
	type item struct{ r, k int }
	var items []item
	for r := 0; r < o.Repeats; r++ {
		for k := range o.Sizes {
			items = append(items, item{r, k})
		}
	}
	p := train.P
	out := make([][]CurvePoint, len(items))
	err := parallel(ctx, len(items), o.Progress, func(i int) error {
		it := items[i]
		n := o.Sizes[it.k]
		pts := make([]float64, n*p)
		y := make([]float64, n)
		for row, src := range perms[it.r][:n] {
			copy(pts[row*p:(row+1)*p], zt[src*p:(src+1)*p])
			y[row] = train.Y[src]
		}
		tree := newKDTree(pts, n, p)
		predict := func(q []float64, nq int) [][]float64 { // per capacity, predictions
			res := make([][]float64, len(o.Capacities))
			for c := range res {
				res[c] = make([]float64, nq)
			}
			var heap []neighbour
			for j := 0; j < nq; j++ {
				heap = tree.knn(q[j*p:(j+1)*p], kmax, heap)
				var sum float64
				next := 0
				for c, kc := range o.Capacities {
					for ; next < int(kc); next++ {
						sum += y[heap[next].idx]
					}
					res[c][j] = sum / kc
				}
			}
			return res
		}
		ptr := predict(pts, n)
		ph := predict(zh, holdout.N)
		for c, kc := range o.Capacities {
			te, err := Metric(o.Metric, y, ptr[c])
			if err != nil {
				return err
			}
			he, err := Metric(o.Metric, holdout.Y, ph[c])
			if err != nil {
				return err
			}
			out[i] = append(out[i], CurvePoint{Capacity: kc, Size: n, Repeat: it.r + 1, TrainErr: te, HoldoutErr: he})
		}
		return nil
	})
	var all []CurvePoint
	for _, o := range out {
		all = append(all, o...)
	}
	return all, err
}

// KNN is a k-nearest-neighbours model on standardised features.
type KNN struct {
	K    int
	tree *kdTree
	y    []float64
	sc   scaler
}

// FitKNN stores the training side in a k-d tree.
func FitKNN(d Data, k int) (*KNN, error) {
	if err := d.check("knn"); err != nil {
		return nil, err
	}
	if k < 1 || k > d.N {
		return nil, fmt.Errorf("knn: k = %d with %d rows", k, d.N)
	}
	sc := newScaler(d)
	return &KNN{K: k, tree: newKDTree(standardised(d, sc), d.N, d.P), y: d.Y, sc: sc}, nil
}

// Predict returns the mean label of the K nearest training rows (for a 0/1 label, the
// fraction labelled 1).
func (m *KNN) Predict(x []float64) float64 {
	z := make([]float64, len(x))
	m.sc.apply(x, z)
	var s float64
	for _, nb := range m.tree.knn(z, m.K, nil) {
		s += m.y[nb.idx]
	}
	return s / float64(m.K)
}

// SweepOptions configure Summarise: the extrapolation options passed to Extrapolate for every
// capacity (Target, At, Bootstrap, Level, Seed, Families, Holdout; Train is filled in).
type SweepOptions = Options

// CapacityResult is one capacity's fitted curve.
type CapacityResult struct {
	Capacity float64
	Result   *Result // nil when no curve could be fitted (Err says why)
	Err      string
	MaxErr   float64 // largest mean holdout error over the sizes
	// Reached is true when a measured size already meets the target (mean holdout error ≤
	// target); ReachedAt is the first such size, and n* is then read off the measurements,
	// not extrapolated.
	Reached   bool
	ReachedAt int
	// Inconsistent is true when the fitted curve reaches the target within the measured
	// sizes although no measured size did: that n* is not used.
	Inconsistent bool
	// Unreliable is true when the curve reaches the target but its backtest error exceeds
	// MaxBacktest: that n* is reported but not used for the best capacity.
	Unreliable bool
}

// MaxBacktest is the largest backtest error (mean relative error predicting the held-out
// largest sizes) at which a capacity's n* is trusted for the sweep's answer (common practice,
// no source).
const MaxBacktest = 0.25

// SizeBest is the capacity with the lowest mean holdout error at one size.
type SizeBest struct {
	Size     int
	Capacity float64
	MeanErr  float64
}

// SweepReport is the planner's summary of a capacity sweep.
type SweepReport struct {
	Model, Metric string
	Target, At    float64
	TrainRows     int
	Capacities    []CapacityResult
	BestAt        []SizeBest // per measured size, ascending
	// BestCapacity / BestNStar: the capacity whose curve reaches Target at the smallest n
	// (NaN when no capacity reaches it).
	BestCapacity float64
	BestNStar    *Interval
	Verdict      string
	Caution      string
}

// CapacityLabel names a capacity for people: "degree 3", or "k = 5" for knn.
func CapacityLabel(model string, c float64) string {
	if model == "knn" {
		return fmt.Sprintf("k = %g", c)
	}
	return fmt.Sprintf("degree %g", c)
}

// MaxMeanErr is the largest mean holdout error over all (capacity, size) of points: the upper
// end of the range a target must lie in.
func MaxMeanErr(points []CurvePoint) float64 {
	type key struct {
		c float64
		n int
	}
	sum := map[key]float64{}
	cnt := map[key]int{}
	for _, p := range points {
		k := key{p.Capacity, p.Size}
		sum[k] += p.HoldoutErr
		cnt[k]++
	}
	mx := 0.0
	for k, s := range sum {
		mx = math.Max(mx, s/float64(cnt[k]))
	}
	return mx
}

// Summarise fits and extrapolates each capacity's holdout curve (Extrapolate, with the
// training-error points for the overfitting diagnosis), finds the capacity that reaches the
// target soonest, and the best capacity at each measured size (the crossover where a higher
// capacity starts to pay off). trainRows is the size of the whole training side.
func Summarise(points []CurvePoint, model, metric string, trainRows int, opts *SweepOptions) (*SweepReport, error) {
	o := Options{}
	if opts != nil {
		o = *opts
	}
	rep := &SweepReport{Model: model, Metric: metric, Target: o.Target, At: o.At, TrainRows: trainRows, BestCapacity: math.NaN(), Caution: Caution}
	if o.Target != 0 {
		if mx := MaxMeanErr(points); !(o.Target > 0 && o.Target < mx) {
			return nil, inputError{fmt.Errorf("%w: target %g must lie in (0, %g), the largest mean holdout error measured", ErrBadTarget, o.Target, mx)}
		}
	}
	byCap := map[float64][]CurvePoint{}
	var caps []float64
	for _, p := range points {
		if _, ok := byCap[p.Capacity]; !ok {
			caps = append(caps, p.Capacity)
		}
		byCap[p.Capacity] = append(byCap[p.Capacity], p)
	}
	sort.Float64s(caps)
	// Best capacity per size.
	sizes := map[int]bool{}
	for _, p := range points {
		sizes[p.Size] = true
	}
	var sz []int
	for n := range sizes {
		sz = append(sz, n)
	}
	sort.Ints(sz)
	for _, n := range sz {
		best := SizeBest{Size: n, MeanErr: math.Inf(1)}
		for _, c := range caps {
			var s float64
			var k int
			for _, p := range byCap[c] {
				if p.Size == n {
					s += p.HoldoutErr
					k++
				}
			}
			if k > 0 && s/float64(k) < best.MeanErr {
				best.MeanErr, best.Capacity = s/float64(k), c
			}
		}
		rep.BestAt = append(rep.BestAt, best)
	}
	for ci, c := range caps {
		var hold, train []Point
		for _, p := range byCap[c] {
			hold = append(hold, Point{N: float64(p.Size), Err: p.HoldoutErr, Repeat: p.Repeat})
			train = append(train, Point{N: float64(p.Size), Err: p.TrainErr, Repeat: p.Repeat})
		}
		cr := CapacityResult{Capacity: c, MaxErr: MaxMeanErr(byCap[c])}
		oc := o
		oc.Train = train
		if o.Progress != nil {
			ci := int64(ci)
			oc.Progress = func(done, total int64) { o.Progress(ci*total+done, int64(len(caps))*total) }
		}
		prev := 0
		if o.Target != 0 {
			for _, n := range sz {
				var s float64
				var k int
				for _, p := range byCap[c] {
					if p.Size == n {
						s += p.HoldoutErr
						k++
					}
				}
				if k > 0 && s/float64(k) <= o.Target {
					cr.Reached, cr.ReachedAt = true, n
					break
				}
				if k > 0 {
					prev = n
				}
			}
			if o.Target >= maxPointErr(hold) {
				oc.Target = 0 // nothing to extrapolate; Extrapolate refuses such a target
			}
		}
		res, err := Extrapolate(hold, &oc)
		if err != nil {
			if errors.Is(err, ErrTooFewSizes) || errors.Is(err, ErrBadTarget) {
				return nil, inputError{err}
			}
			cr.Err = err.Error()
		}
		cr.Result = res
		var nstar *Interval
		switch {
		case cr.Reached:
			nstar = &Interval{Est: float64(cr.ReachedAt), Lo: float64(prev), Hi: float64(cr.ReachedAt), Method: "measured"}
		case res != nil && res.NStar != nil && res.Reachable && !math.IsInf(res.NStar.Est, 0) && res.Best.BacktestErr > MaxBacktest:
			cr.Unreliable = true
		case res != nil && res.NStar != nil && res.Reachable && !math.IsInf(res.NStar.Est, 0) && res.NStar.Est > float64(sz[len(sz)-1]):
			// No measured size met the target, so a fitted n* within the measured sizes
			// contradicts the measurements; only one beyond them is an estimate.
			nstar = res.NStar
		case res != nil && res.NStar != nil && res.Reachable && !math.IsInf(res.NStar.Est, 0):
			cr.Inconsistent = true
		}
		rep.Capacities = append(rep.Capacities, cr)
		if nstar != nil && (rep.BestNStar == nil || nstar.Est < rep.BestNStar.Est) {
			rep.BestCapacity, rep.BestNStar = c, nstar
		}
	}
	rep.Verdict = sweepVerdict(rep)
	return rep, nil
}

func maxPointErr(p []Point) float64 {
	mx := 0.0
	for _, q := range p {
		mx = math.Max(mx, q.Err)
	}
	return mx
}

func fmtN(v float64) string {
	if math.IsInf(v, 1) {
		return "unbounded"
	}
	return strconv.FormatFloat(math.Ceil(v), 'f', 0, 64)
}

// sweepVerdict is the planner's answer in a few plain sentences.
func sweepVerdict(r *SweepReport) string {
	var b strings.Builder
	lab := func(c float64) string { return CapacityLabel(r.Model, c) }
	if r.Target != 0 {
		if r.BestNStar != nil {
			iv := r.BestNStar
			if iv.Method == "measured" {
				fmt.Fprintf(&b, "The target %s %g is already met with %s: its mean holdout error is at or below it from %s training rows on (measured, not extrapolated; the training side has %d).", r.Metric, r.Target, lab(r.BestCapacity), fmtN(iv.Est), r.TrainRows)
			} else {
				fmt.Fprintf(&b, "The target %s %g is reached soonest with %s, at about %s training rows (%s interval %s to %s); the training side has %d.",
					r.Metric, r.Target, lab(r.BestCapacity), fmtN(iv.Est), iv.Method, fmtN(iv.Lo), fmtN(iv.Hi), r.TrainRows)
				if iv.Est <= float64(r.TrainRows) {
					b.WriteString(" The data in hand should already suffice.")
				} else {
					fmt.Fprintf(&b, " That is about %s more rows than the training side has.", fmtN(iv.Est-float64(r.TrainRows)))
				}
				for _, c := range r.Capacities {
					if c.Capacity == r.BestCapacity && c.Result != nil && c.Result.AsymptoteUnidentified {
						fmt.Fprintf(&b, " The asymptote of %s is not identified by the measured sizes, so this n* assumes the measured trend goes on.", lab(c.Capacity))
					}
				}
			}
		}
		var unreach, noisy, unsettled, far []string
		for _, c := range r.Capacities {
			if c.Result != nil && c.Result.NStar != nil && !c.Result.Reachable && !c.Reached {
				switch {
				case c.Result.AsymptoteUnidentified:
					unsettled = append(unsettled, lab(c.Capacity))
				case c.Result.NStarBeyondHorizon:
					far = append(far, lab(c.Capacity))
				case r.BestNStar == nil:
				case c.Result.Gap != nil && c.Result.Gap.VarianceLimited:
					noisy = append(noisy, lab(c.Capacity))
				default:
					unreach = append(unreach, lab(c.Capacity))
				}
			}
		}
		if r.BestNStar == nil {
			if len(unsettled) > 0 {
				fmt.Fprintf(&b, "No capacity tried is shown to reach the target %s %g: with %s the asymptote is not identified by the measured sizes, so whether more data would get there is not settled; measure at larger sizes, or try more capacity.", r.Metric, r.Target, strings.Join(unsettled, ", "))
				unsettled = nil
			} else {
				fmt.Fprintf(&b, "No capacity tried reaches the target %s %g: more data will not get there; more capacity might.", r.Metric, r.Target)
			}
		}
		if len(unreach) > 0 {
			fmt.Fprintf(&b, " With %s the target is at or below the fitted asymptote (or the flat level): more data will not get there, more capacity might (underfitting).", strings.Join(unreach, ", "))
		}
		if len(unsettled) > 0 {
			fmt.Fprintf(&b, " With %s the asymptote is not identified by the measured sizes: whether more data would reach the target is not settled.", strings.Join(unsettled, ", "))
		}
		if len(far) > 0 {
			fmt.Fprintf(&b, " With %s the fitted curve would reach the target only beyond %g× the largest measured size: not a meaningful extrapolation, in practice not reachable.", strings.Join(far, ", "), float64(Horizon))
		}
		var inc []string
		for _, c := range r.Capacities {
			if c.Inconsistent {
				inc = append(inc, lab(c.Capacity))
			}
		}
		var unrel []string
		for _, c := range r.Capacities {
			if c.Unreliable {
				unrel = append(unrel, lab(c.Capacity))
			}
		}
		if len(unrel) > 0 {
			fmt.Fprintf(&b, " The n* of %s is not used: refitted on the smaller sizes, the curve missed the largest ones by more than %.0f%% (backtest).", strings.Join(unrel, ", "), 100*MaxBacktest)
		}
		if len(inc) > 0 {
			fmt.Fprintf(&b, " For %s the fitted curve crosses the target inside the measured sizes although no measurement did: that n* is not trusted.", strings.Join(inc, ", "))
		}
		if len(noisy) > 0 {
			fmt.Fprintf(&b, " With %s the fitted curve does not reach the target either, but its training error is far below its holdout error: the curve is dominated by variance at these sizes, so its asymptote is poorly determined; less capacity or more regularisation is the safer choice.", strings.Join(noisy, ", "))
		}
	}
	if len(r.BestAt) > 0 {
		var parts []string
		start := r.BestAt[0]
		for i := 1; i <= len(r.BestAt); i++ {
			if i == len(r.BestAt) || r.BestAt[i].Capacity != start.Capacity {
				end := r.BestAt[i-1].Size
				if start.Size == end {
					parts = append(parts, fmt.Sprintf("%s at n = %d", lab(start.Capacity), end))
				} else {
					parts = append(parts, fmt.Sprintf("%s for n = %d to %d", lab(start.Capacity), start.Size, end))
				}
				if i < len(r.BestAt) {
					start = r.BestAt[i]
				}
			}
		}
		fmt.Fprintf(&b, " Lowest holdout error: %s.", strings.Join(parts, ", then "))
	}
	if r.At > 0 {
		best := -1
		for i, c := range r.Capacities {
			if c.Result != nil && c.Result.AtErr != nil && !math.IsNaN(c.Result.AtErr.Est) &&
				(best < 0 || c.Result.AtErr.Est < r.Capacities[best].Result.AtErr.Est) {
				best = i
			}
		}
		if best >= 0 {
			c := r.Capacities[best]
			iv := c.Result.AtErr
			fmt.Fprintf(&b, " At n = %g the lowest expected %s is %.4g with %s (%s interval %.4g to %.4g).", r.At, r.Metric, iv.Est, lab(c.Capacity), iv.Method, iv.Lo, iv.Hi)
		}
	}
	var over []string
	for _, c := range r.Capacities {
		if c.Result != nil && c.Result.Gap != nil && c.Result.Gap.VarianceLimited {
			g := c.Result.Gap
			s := fmt.Sprintf("%s (training error %.0f%% of holdout", lab(c.Capacity), 100*g.Ratio)
			if !math.IsNaN(g.Exponent) {
				s += fmt.Sprintf(", gap shrinking about as n^(−%.2g)", g.Exponent)
			}
			over = append(over, s+")")
		}
	}
	if len(over) > 0 {
		fmt.Fprintf(&b, " Variance-limited (overfitting) at the largest size: %s; more data narrows the gap.", strings.Join(over, "; "))
	}
	var early []string
	for _, c := range r.Capacities {
		if c.Result == nil || c.Result.Gap == nil || c.Result.Gap.VarianceLimited {
			continue
		}
		var at []string
		for _, g := range c.Result.Gap.BySize {
			if g.VarianceLimited {
				at = append(at, fmt.Sprintf("%g", g.N))
			}
		}
		if len(at) > 0 {
			early = append(early, fmt.Sprintf("%s at n = %s", lab(c.Capacity), strings.Join(at, ", ")))
		}
	}
	if len(early) > 0 {
		fmt.Fprintf(&b, " Variance-limited (training error under half the holdout error) only at smaller sizes: %s; the gap narrows with n.", strings.Join(early, "; "))
	}
	b.WriteString(" " + Caution)
	return strings.TrimSpace(b.String())
}
