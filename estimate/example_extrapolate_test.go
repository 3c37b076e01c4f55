package estimate_test

import (
	"fmt"

	"splitsmith/estimate"
)

// The closed form n* = (b/(T−a))^(1/c) of the inverse power law.
func ExampleNStarPow3() {
	// error = 0.25 + 2·n^(−0.5) reaches 0.5 at n = (2/0.25)² = 64
	fmt.Println(estimate.NStarPow3(0.5, 0.25, 2, 0.5))
	fmt.Println(estimate.NStarPow3(0.2, 0.25, 2, 0.5)) // below the asymptote
	// Output:
	// 64
	// +Inf
}

// The worked example of Riley et al., BMJ 2020;368:m441.
func ExampleRileyBinary() {
	ss, err := estimate.RileyBinary(24, 0.288, 0.174, 0.9)
	if err != nil {
		panic(err)
	}
	for _, c := range ss.Criteria {
		fmt.Println(c.Name, c.N, c.Binds)
	}
	fmt.Printf("n = %d, %.0f events, %.1f events per parameter\n", ss.N, ss.Events, ss.EPP)
	// Output:
	// shrinkage 623 false
	// optimism 662 true
	// overall_risk 221 false
	// n = 662, 115 events, 4.8 events per parameter
}

// Extrapolate a learning curve measured at six sizes (invented holdout errors of a
// pipe wall-loss model, two repeats each) to the size that reaches a target error.
func ExampleExtrapolate() {
	var pts []estimate.Point
	for i, n := range []float64{500, 1000, 2000, 4000, 8000, 16000} {
		for r, noise := range []float64{-0.0005, 0.0005} {
			pts = append(pts, estimate.Point{N: n, Err: estimate.Pow3(n, 0.2, 3, 0.5) + noise*float64(1+i%2), Repeat: r})
		}
	}
	res, err := estimate.Extrapolate(pts, &estimate.Options{Families: []string{"pow3"}, Target: 0.23, Bootstrap: 200, Seed: 1})
	if err != nil {
		panic(err)
	}
	fmt.Printf("asymptote %.3f, n* ≈ %s, reachable %v\n", res.Asymptote.Est, estimate.SizeString(res.NStar.Est), res.Reachable)
	fmt.Printf("true n* %s\n", estimate.SizeString(estimate.NStarPow3(0.23, 0.2, 3, 0.5)))
	// Output:
	// asymptote 0.200, n* ≈ 10000, reachable true
	// true n* 10000
}
