package estimate_test

import (
	"context"
	"fmt"
	"math"
	"math/rand/v2"

	"splitsmith/estimate"
)

// Measure learning curves of polynomial ridge regression at degrees 1 and 3 on a cubic
// signal: degree 1 levels off at its bias; degree 3 approaches the noise variance 0.04.
func ExampleMeasureCurves() {
	rng := rand.New(rand.NewPCG(1, 2))
	mk := func(n int) estimate.Data {
		d := estimate.Data{X: make([]float64, n), Y: make([]float64, n), N: n, P: 1}
		for i := range d.X {
			x := 4*rng.Float64() - 2
			d.X[i], d.Y[i] = x, x*x*x-2*x+0.2*rng.NormFloat64()
		}
		return d
	}
	train, holdout := mk(2000), mk(1000)
	pts, err := estimate.MeasureCurves(context.Background(), train, holdout, &estimate.CurveOptions{
		Capacities: []float64{1, 3}, Sizes: []int{50, 200, 800, 2000}, Repeats: 3})
	if err != nil {
		fmt.Println(err)
		return
	}
	mean := map[[2]float64]float64{}
	for _, p := range pts {
		mean[[2]float64{p.Capacity, float64(p.Size)}] += p.HoldoutErr / 3
	}
	for _, c := range []float64{1, 3} {
		fmt.Printf("degree %g:", c)
		for _, n := range []float64{50, 200, 800, 2000} {
			fmt.Printf(" %.2g", math.Round(mean[[2]float64{c, n}]*1000)/1000)
		}
		fmt.Println()
	}
	// Output:
	// degree 1: 1.9 1.6 1.5 1.5
	// degree 3: 0.047 0.042 0.041 0.041
}
