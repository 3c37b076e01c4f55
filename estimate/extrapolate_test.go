package estimate

import (
	"errors"
	"math"
	"math/rand/v2"
	"runtime"
	"strings"
	"testing"
)

// pow3Points generates R repeats at each size of a + b·n^(−c) with Gaussian noise of sd
// sigma (invented data for tests).
func pow3Points(rng *rand.Rand, sizes []float64, R int, a, b, c, sigma float64) []Point {
	var pts []Point
	for _, n := range sizes {
		for r := 0; r < R; r++ {
			pts = append(pts, Point{N: n, Err: Pow3(n, a, b, c) + sigma*rng.NormFloat64(), Repeat: r})
		}
	}
	return pts
}

func geomSizes(n0 float64, k int, ratio float64) []float64 {
	s := make([]float64, k)
	for i := range s {
		s[i] = n0 * math.Pow(ratio, float64(i))
	}
	return s
}

// TestExtrapolate_Coverage is the coverage test: data from a known pow3 curve with noise,
// fitted on the smaller half of the sizes; the true n* for the target must lie inside the
// reported 95% interval in at least 90% of seeded trials (100 trials, 200 bootstrap draws
// each instead of the default 1000, to keep the test fast).
func TestExtrapolate_Coverage(t *testing.T) {
	const a, b, c, sigma = 0.08, 1.5, 0.5, 0.004
	all := geomSizes(100, 10, 2) // 100 … 51200
	half := all[:5]              // fit on 100 … 1600
	T := Pow3(all[7], a, b, c)   // true n* = 12800, 8× the largest fitted size
	trueN := NStarPow3(T, a, b, c)
	const trials = 100
	covered := 0
	for s := 0; s < trials; s++ {
		rng := rand.New(rand.NewPCG(uint64(s), 7))
		res, err := Extrapolate(pow3Points(rng, half, 5, a, b, c, sigma), &Options{Families: []string{"pow3"}, Target: T, Bootstrap: 200, Seed: uint64(s)})
		if err != nil {
			t.Fatal(err)
		}
		if res.NStar.Lo <= trueN && trueN <= res.NStar.Hi {
			covered++
		} else {
			t.Logf("trial %d: %+v a=%+v", s, *res.NStar, res.Asymptote)
		}
	}
	t.Logf("coverage %d/%d", covered, trials)
	if float64(covered) < 0.9*trials {
		t.Errorf("true n* %g inside the 95%% interval in %d of %d trials, want ≥ 90%%", trueN, covered, trials)
	}
}

// TestNStarPow3: n* = (b/(T−a))^(1/c) (algebra of a + b·n^(−c) = T). With a = 0.05, b = 2,
// c = 0.5, T = 0.07: (2/0.02)² = 10000 exactly.
func TestNStarPow3(t *testing.T) {
	if got := NStarPow3(0.07, 0.05, 2, 0.5); math.Abs(got-10000) > 1e-8 {
		t.Errorf("n* = %.12g, want 10000", got)
	}
	if got := Pow3(10000, 0.05, 2, 0.5); math.Abs(got-0.07) > 1e-15 {
		t.Errorf("pow3(10000) = %.17g, want 0.07", got)
	}
	if !math.IsInf(NStarPow3(0.05, 0.05, 2, 0.5), 1) || !math.IsInf(NStarPow3(0.04, 0.05, 2, 0.5), 1) {
		t.Error("a target at or below the asymptote must give +Inf")
	}
	// numeric root finding agrees with every family's closed form
	params := map[string][]float64{"pow3": {0.05, 2, 0.5}, "pow2": {2, 0.4}, "exp3": {0.05, 0.5, 0.001}, "log2": {0.9, -0.07}}
	for _, fam := range Families {
		if fam.Name == "flat" {
			continue // a constant curve meets a target at its level at every n: no unique n*
		}
		p := params[fam.Name]
		T := fam.F(3000, p)
		closed := fam.NStar(T, p)
		numeric := NStarNumeric(func(n float64) float64 { return fam.F(n, p) }, T)
		if d := sigDigits(numeric, closed); d < 10 || math.Abs(closed-3000) > 1e-6 {
			t.Errorf("%s: closed form %.12g, numeric %.12g, want 3000", fam.Name, closed, numeric)
		}
	}
}

// TestBCaLevel: ẑ₀ = 0.1, â = 0.05 give adjusted levels 0.05461 and 0.99172 for a 95%
// interval, from Efron & Tibshirani's formula α₁ = Φ(ẑ₀ + (ẑ₀ + z_α)/(1 − â(ẑ₀ + z_α)))
// (An Introduction to the Bootstrap, 1993, eq. 14.10); checked with scipy:
// /usr/bin/python3 -c "from scipy.stats import norm; z0,a=0.1,0.05; f=lambda al:norm.cdf(z0+(z0+norm.ppf(al))/(1-a*(z0+norm.ppf(al)))); print(repr(f(0.025)), repr(f(0.975)))"
// → 0.05461007689835953 0.9917237368688839 (scipy 1.10.1)
func TestBCaLevel(t *testing.T) {
	lo, hi := BCaLevel(0.1, 0.05, 0.025), BCaLevel(0.1, 0.05, 0.975)
	if math.Abs(lo-0.05461007689835953) > 1e-9 || math.Abs(hi-0.9917237368688839) > 1e-9 {
		t.Errorf("BCa levels %.10f, %.10f; want 0.0546100769, 0.9917237369", lo, hi)
	}
	if math.Abs(lo-0.05461) > 5e-6 || math.Abs(hi-0.99172) > 5e-6 {
		t.Errorf("BCa levels %.5f, %.5f; want 0.05461, 0.99172", lo, hi)
	}
	// ẑ₀ = â = 0 is the percentile interval
	if l := BCaLevel(0, 0, 0.025); math.Abs(l-0.025) > 1e-12 {
		t.Errorf("BCaLevel(0, 0, 0.025) = %g", l)
	}
}

func TestExtrapolate_RecoversCurve(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 3))
	pts := pow3Points(rng, geomSizes(200, 8, 2), 5, 0.1, 2, 0.5, 0.002)
	res, err := Extrapolate(pts, &Options{Target: 0.12, At: 100000, Bootstrap: 300, Seed: 1})
	if err != nil {
		t.Fatal(err)
	}
	if res.Best.Family != "pow3" {
		t.Errorf("chose %s, want pow3 (fits %+v)", res.Best.Family, res.Fits)
	}
	if !(res.Asymptote.Lo <= 0.1 && 0.1 <= res.Asymptote.Hi) {
		t.Errorf("asymptote interval %+v misses the true 0.1", res.Asymptote)
	}
	if !res.Reachable || res.NStar == nil || res.AtErr == nil {
		t.Fatalf("result %+v", res)
	}
	trueN := NStarPow3(0.12, 0.1, 2, 0.5) // 10000
	if !(res.NStar.Lo <= trueN && trueN <= res.NStar.Hi) {
		t.Errorf("n* interval %+v misses the true %g", *res.NStar, trueN)
	}
	if trueAt := Pow3(100000, 0.1, 2, 0.5); !(res.AtErr.Lo <= trueAt && trueAt <= res.AtErr.Hi) {
		t.Errorf("error at n = 100000: interval %+v misses the true %g", *res.AtErr, trueAt)
	}
	if !strings.Contains(res.Verdict, "reaches the target") || !strings.Contains(res.Verdict, "not guarantees") {
		t.Errorf("verdict %q", res.Verdict)
	}
	// determinism: same seed, same result (draws are seeded per draw, not per worker)
	again, _ := Extrapolate(pts, &Options{Target: 0.12, At: 100000, Bootstrap: 300, Seed: 1})
	if *again.NStar != *res.NStar || again.Verdict != res.Verdict {
		t.Errorf("not deterministic: %+v vs %+v", *again.NStar, *res.NStar)
	}
}

func TestExtrapolate_Unreachable(t *testing.T) {
	rng := rand.New(rand.NewPCG(4, 4))
	pts := pow3Points(rng, geomSizes(200, 8, 2), 5, 0.1, 2, 0.5, 0.002)
	var train []Point
	for _, p := range pts {
		train = append(train, Point{N: p.N, Err: 0.9 * p.Err, Repeat: p.Repeat})
	}
	res, err := Extrapolate(pts, &Options{Families: []string{"pow3"}, Target: 0.09, Bootstrap: 200, Train: train})
	if err != nil {
		t.Fatal(err)
	}
	if res.Reachable || !strings.Contains(res.Verdict, "not reachable with this capacity") || !strings.Contains(res.Verdict, "bias-limited") {
		t.Errorf("target below the asymptote: reachable=%v verdict %q", res.Reachable, res.Verdict)
	}
}

func TestExtrapolate_VarianceLimited(t *testing.T) {
	rng := rand.New(rand.NewPCG(5, 5))
	sizes := geomSizes(200, 8, 2)
	pts := pow3Points(rng, sizes, 3, 0.05, 3, 0.5, 0.002)
	var train []Point
	for _, n := range sizes {
		for r := 0; r < 3; r++ {
			train = append(train, Point{N: n, Err: 0.3 * Pow3(n, 0.05, 3, 0.5), Repeat: r})
		}
	}
	res, err := Extrapolate(pts, &Options{Bootstrap: 100, Train: train})
	if err != nil {
		t.Fatal(err)
	}
	if res.Gap == nil || !res.Gap.VarianceLimited || !strings.Contains(res.Verdict, "variance-limited") {
		t.Errorf("gap %+v verdict %q", res.Gap, res.Verdict)
	}
	// the gap 0.7·(0.05 + 3·n^(−1/2)) shrinks: a positive exponent below 0.5
	if !(res.Gap.Exponent > 0 && res.Gap.Exponent < 0.5) || math.Abs(res.Gap.Ratio-0.3) > 0.05 {
		t.Errorf("gap %+v, want ratio ≈ 0.3 and exponent in (0, 0.5)", res.Gap)
	}
}

func TestExtrapolate_BadInput(t *testing.T) {
	three := []Point{{N: 100, Err: 0.3}, {N: 200, Err: 0.25}, {N: 400, Err: 0.2}}
	if _, err := Extrapolate(three, nil); !errors.Is(err, ErrTooFewSizes) {
		t.Errorf("3 sizes: %v", err)
	}
	four := append(three, Point{N: 800, Err: 0.18})
	for _, T := range []float64{-0.1, 0.3, 0.5} {
		if _, err := Extrapolate(four, &Options{Target: T}); !errors.Is(err, ErrBadTarget) {
			t.Errorf("target %g: %v", T, err)
		}
	}
	bad := append([]Point{{N: 0, Err: 0.3}}, four...)
	if _, err := Extrapolate(bad, nil); !errors.Is(err, ErrBadPoint) {
		t.Errorf("n = 0: %v", err)
	}
	if _, err := Extrapolate(four, &Options{Families: []string{"cubic"}}); err == nil {
		t.Error("unknown family accepted")
	}
}

func BenchmarkExtrapolate(b *testing.B) {
	rng := rand.New(rand.NewPCG(3, 3))
	pts := pow3Points(rng, geomSizes(200, 8, 2), 5, 0.1, 2, 0.5, 0.002)
	for i := 0; i < b.N; i++ {
		if _, err := Extrapolate(pts, &Options{Target: 0.12, At: 100000}); err != nil {
			b.Fatal(err)
		}
	}
}

// TestExtrapolate_IndependentOfCores: bootstrap draws are seeded per draw, so one core and
// several give the same result.
func TestExtrapolate_IndependentOfCores(t *testing.T) {
	rng := rand.New(rand.NewPCG(8, 8))
	pts := pow3Points(rng, geomSizes(200, 7, 2), 4, 0.1, 2, 0.5, 0.003)
	o := &Options{Target: 0.13, At: 50000, Bootstrap: 200, Seed: 9}
	prev := runtime.GOMAXPROCS(1)
	one, err1 := Extrapolate(pts, o)
	runtime.GOMAXPROCS(4)
	four, err4 := Extrapolate(pts, o)
	runtime.GOMAXPROCS(prev)
	if err1 != nil || err4 != nil {
		t.Fatal(err1, err4)
	}
	if *one.NStar != *four.NStar || *one.AtErr != *four.AtErr || one.Asymptote != four.Asymptote || one.Verdict != four.Verdict {
		t.Errorf("1 core %+v, 4 cores %+v", *one.NStar, *four.NStar)
	}
}

// TestVerdict covers each reachability sentence on constructed results.
func TestVerdict(t *testing.T) {
	base := func() *Result {
		return &Result{Best: Fit{Family: "pow3", BacktestErr: 0.02}, Sizes: []float64{100, 1000}, Level: 0.95,
			Asymptote: Interval{Est: 0.1, Lo: 0.08, Hi: 0.12, Method: "bca"}, Reachable: true, HorizonN: 1e6}
	}
	cases := []struct {
		name   string
		target float64
		nstar  Interval
		reach  bool
		want   string
	}{
		{"below asymptote", 0.09, Interval{Est: inf, Lo: inf, Hi: inf}, false, "at or below the asymptote: not reachable with this capacity"},
		{"inside its interval", 0.11, Interval{Est: 5000, Lo: 3000, Hi: inf}, false, "lies within the asymptote's interval: it may not be reachable"},
		{"within the data", 0.2, Interval{Est: 500, Lo: 400, Hi: 600}, true, "already reaches the target 0.2 within the measured sizes"},
		{"extrapolated", 0.15, Interval{Est: 4000, Lo: 3000, Hi: 6000}, true, "reaches the target 0.15 at n* ≈ 4000"},
		{"far", 0.13, Interval{Est: 50000, Lo: 20000, Hi: 90000}, true, "far beyond the measured sizes"},
		{"absurdly far", 0.13, Interval{Est: 5e7, Lo: 1e6, Hi: inf}, false, "only beyond 1000× the largest measured size (1000000 samples), which is not a meaningful extrapolation"},
	}
	for _, c := range cases {
		r := base()
		ns := c.nstar
		r.NStar, r.Reachable = &ns, c.reach
		r.NStarBeyondHorizon = c.name == "absurdly far"
		v := verdict(r, Options{Target: c.target})
		if !strings.Contains(v, c.want) || !strings.Contains(v, Caution) {
			t.Errorf("%s: verdict %q lacks %q", c.name, v, c.want)
		}
	}
	r := base()
	r.Asymptote = Interval{Method: "none"}
	ns := Interval{Est: inf, Lo: inf, Hi: inf}
	r.NStar, r.Reachable = &ns, false
	if v := verdict(r, Options{Target: 0.05}); !strings.Contains(v, "not a meaningful extrapolation: in practice not reachable") {
		t.Errorf("no asymptote, never reached: %q", v)
	}
	// flat: the level with its interval, a target below it not reachable
	r = base()
	r.Best.Family, r.Flat = "flat", true
	r.NStar, r.Reachable = &Interval{Est: inf, Lo: inf, Hi: inf}, false
	if v := verdict(r, Options{Target: 0.09}); !strings.Contains(v, "no longer falls with n") || !strings.Contains(v, "below that level: not reachable with this capacity") {
		t.Errorf("flat: %q", v)
	}
	// unidentified asymptote with its lower end on the bound
	r = base()
	r.Asymptote = Interval{Est: 0.02, Lo: 0, Hi: 0.12, Method: "bca"}
	r.AsymptoteUnidentified, r.AsymptoteLoAtBound = true, true
	r.NStar, r.Reachable = &Interval{Est: 8000, Lo: 2000, Hi: inf}, false
	if v := verdict(r, Options{Target: 0.1}); !strings.Contains(v, "is not identified by these data: the 95% interval runs from 0 (bound) to 0.12") || !strings.Contains(v, "not settled by these sizes") {
		t.Errorf("unidentified: %q", v)
	}
}
