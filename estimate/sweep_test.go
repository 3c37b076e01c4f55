package estimate

import (
	"context"
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/floats/scalar"
)

// sweepBenchData is the benchmark's data (the same generator as bench/sweep_sklearn.py, not
// the same random numbers): three U(−1, 1) features and
// y = sin(2·x0) + x1·x2 + 0.5·x2² + N(0, 0.3²).
func sweepBenchData(seed uint64, n int) Data {
	rng := rand.New(rand.NewPCG(seed, 1))
	d := Data{X: make([]float64, n*3), Y: make([]float64, n), N: n, P: 3}
	for i := 0; i < n; i++ {
		x0, x1, x2 := 2*rng.Float64()-1, 2*rng.Float64()-1, 2*rng.Float64()-1
		d.X[3*i], d.X[3*i+1], d.X[3*i+2] = x0, x1, x2
		d.Y[i] = math.Sin(2*x0) + x1*x2 + 0.5*x2*x2 + 0.3*rng.NormFloat64()
	}
	return d
}

// BenchmarkSweep_5Degrees8Sizes5Repeats100k is the speed case: degrees 1–5, 8
// automatic sizes, 5 repeats, 100,000 training rows with 3 features, 25,000 holdout rows.
// bench/estimate_sweep.sh runs it beside scikit-learn's learning_curve.
func BenchmarkSweep_5Degrees8Sizes5Repeats100k(b *testing.B) {
	train := sweepBenchData(1, 100000)
	hold := sweepBenchData(2, 25000)
	o := &CurveOptions{Capacities: []float64{1, 2, 3, 4, 5}, Repeats: 5, Metric: "mse"}
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		pts, err := MeasureCurves(context.Background(), train, hold, o)
		if err != nil || len(pts) != 5*8*5 {
			b.Fatal(err, len(pts))
		}
	}
}

// The sweep on the benchmark's data: the degree-5 fit beats the linear one on the holdout,
// and no system needed QR (standardising before expanding keeps them well conditioned).
func TestSweep_BenchDataWellConditioned(t *testing.T) {
	train := sweepBenchData(1, 5000)
	hold := sweepBenchData(2, 2000)
	o, err := CurveOptions{Capacities: []float64{1, 5}, Repeats: 2, Metric: "mse"}.resolve(train, hold)
	if err != nil {
		t.Fatal(err)
	}
	pts, stats, err := sweepRidgeStats(context.Background(), train, hold, []int{1, 5}, o, nil)
	if err != nil {
		t.Fatal(err)
	}
	if stats.QRSolves != 0 {
		t.Errorf("%d of %d systems fell back to QR", stats.QRSolves, stats.Systems)
	}
	var lin, quint float64
	for _, p := range pts {
		if p.Size == 5000 {
			if p.Capacity == 1 {
				lin = p.HoldoutErr
			} else {
				quint = p.HoldoutErr
			}
		}
	}
	// The noise variance 0.09 bounds the holdout MSE from below.
	if !(quint < lin && quint > 0.09*0.95) {
		t.Errorf("holdout MSE degree 5 %g, degree 1 %g", quint, lin)
	}
}

// The QR path over several row blocks (degree 12 in one skewed variable: Cholesky is refused) gives
// the same fits as a dense QR of each subset (FitPolyRidge's fallback), ridge included.
func TestSweep_QRPathMatchesDenseQR(t *testing.T) {
	rng := rand.New(rand.NewPCG(11, 12))
	mk := func(n int) Data {
		d := Data{X: make([]float64, n), Y: make([]float64, n), N: n, P: 1}
		for i := range d.X {
			x := math.Exp(0.6 * rng.NormFloat64())
			d.X[i], d.Y[i] = x, math.Sin(2*x)+0.1*rng.NormFloat64()
		}
		return d
	}
	train, hold := mk(1500), mk(200)
	for _, ridge := range []float64{-1, 1e-6} {
		o := CurveOptions{Sizes: []int{300, 700, 1100, 1500}, Repeats: 2, Metric: "mse", Ridge: ridge, Seed: 3}
		pts, stats, err := sweepRidgeStats(context.Background(), train, hold, []int{2, 12}, o, nil)
		if err != nil {
			t.Fatal(err)
		}
		if stats.QRSolves != 8 {
			t.Errorf("ridge %g: %d QR solves, want the 8 degree-12 systems", ridge, stats.QRSolves)
		}
		for _, pt := range pts {
			perm := permutation(3, pt.Repeat-1, train.N)[:pt.Size]
			sub := Data{N: pt.Size, P: 1}
			for _, src := range perm {
				sub.X = append(sub.X, train.X[src])
				sub.Y = append(sub.Y, train.Y[src])
			}
			// Same standardisation as the sweep (the whole side's), so the penalty means the same.
			sc := newScaler(train)
			m, err := fitPolyRidgeScaled(sub, int(pt.Capacity), ridge, sc)
			if err != nil {
				t.Fatal(err)
			}
			var se float64
			for i := 0; i < hold.N; i++ {
				e := hold.Y[i] - m.Predict(hold.Row(i))
				se += e * e
			}
			if got := se / float64(hold.N); !scalar.EqualWithinRel(pt.HoldoutErr, got, 1e-7) {
				t.Errorf("ridge %g degree %v size %d: sweep %.12g, dense fit %.12g", ridge, pt.Capacity, pt.Size, pt.HoldoutErr, got)
			}
		}
	}
}

// BenchmarkCurves_KNN_3Ks8Sizes5Repeats20k shows k-nearest neighbours' cost (a k-d tree built
// per (repeat, size); every training and holdout row queried): k = 1, 5, 25, 20,000 training
// rows with 3 features, 5,000 holdout rows.
func BenchmarkCurves_KNN_3Ks8Sizes5Repeats20k(b *testing.B) {
	train := sweepBenchData(3, 20000)
	hold := sweepBenchData(4, 5000)
	o := &CurveOptions{Model: "knn", Capacities: []float64{1, 5, 25}, Repeats: 5}
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		if _, err := MeasureCurves(context.Background(), train, hold, o); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkCurves_Logistic_3Degrees8Sizes5Repeats20k: logistic regression (IRLS) at degrees
// 1–3 on 20,000 training rows with 3 features; every (degree, size, repeat) is its own fit.
func BenchmarkCurves_Logistic_3Degrees8Sizes5Repeats20k(b *testing.B) {
	train := sweepBenchData(5, 20000)
	hold := sweepBenchData(6, 5000)
	for _, d := range []*Data{&train, &hold} {
		for i := range d.Y {
			d.Y[i] = b2f(d.Y[i] > 0.4)
		}
	}
	o := &CurveOptions{Model: "logistic", Capacities: []float64{1, 2, 3}, Repeats: 5}
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		if _, err := MeasureCurves(context.Background(), train, hold, o); err != nil {
			b.Fatal(err)
		}
	}
}
