package estimate

import (
	"bytes"
	"encoding/json"
	"math"
	"math/rand/v2"
	"reflect"
	"runtime"
	"strings"
	"testing"

	"gonum.org/v1/plot/vg"
)

// bandPoints is constructed data with a known answer: e = 0.1 + 2·n^(−1/2) at six sizes
// 100…3200, three repeats per size offset by a rotation of (+0.003, −0.001, −0.002). The
// offsets sum to zero at every size, so the per-size means lie exactly on the curve and the
// pow3 fit recovers it (a = 0.1, b = 2, c = 0.5) up to the fit's tolerance.
func bandPoints() []Point {
	off := []float64{0.003, -0.001, -0.002}
	var pts []Point
	for i, n := range []float64{100, 200, 400, 800, 1600, 3200} {
		for r := 0; r < 3; r++ {
			pts = append(pts, Point{N: n, Err: 0.1 + 2/math.Sqrt(n) + off[(i+r)%3], Repeat: r + 1})
		}
	}
	return pts
}

func bandResult(t *testing.T) *Result {
	t.Helper()
	res, err := Extrapolate(bandPoints(), &Options{Families: []string{"pow3"}, Target: 0.13, Bootstrap: 300, Seed: 4})
	if err != nil {
		t.Fatal(err)
	}
	return res
}

// The band has BandPoints log-spaced sizes from the smallest measured size to BandEnd,
// contains the fitted curve (and, by construction, the true curve) at every one, and is
// wider beyond the measured sizes than within them.
func TestBand_ContainsCurveAndWidens(t *testing.T) {
	res := bandResult(t)
	if res.Best.Family != "pow3" || math.Abs(res.Best.Params[0]-0.1) > 1e-6 || math.Abs(res.Best.Params[2]-0.5) > 1e-5 {
		t.Fatalf("fit %+v, want a = 0.1, b = 2, c = 0.5 (exact by construction)", res.Best)
	}
	b := res.Band
	if len(b) != BandPoints || b[0].N != 100 || b[len(b)-1].N != BandEnd(res, 0) {
		t.Fatalf("band grid: %d points, %g to %g; want %d, 100 to %g", len(b), b[0].N, b[len(b)-1].N, BandPoints, BandEnd(res, 0))
	}
	widthAt3200, maxInside := 0.0, 0.0
	for i, p := range b {
		if i > 0 && !(p.N > b[i-1].N) {
			t.Fatalf("band sizes not ascending at %d", i)
		}
		fit := Predict(res.Best, p.N)
		truth := 0.1 + 2/math.Sqrt(p.N)
		if !(p.Lo <= fit && fit <= p.Hi) {
			t.Errorf("n = %g: fitted %g outside band [%g, %g]", p.N, fit, p.Lo, p.Hi)
		}
		if !(p.Lo <= truth && truth <= p.Hi) {
			t.Errorf("n = %g: true %g outside band [%g, %g]", p.N, truth, p.Lo, p.Hi)
		}
		if p.N <= 3200 {
			maxInside = math.Max(maxInside, p.Hi-p.Lo)
			widthAt3200 = p.Hi - p.Lo
		}
	}
	last := b[len(b)-1]
	if !(last.Hi-last.Lo > 1.5*widthAt3200) || !(last.Hi-last.Lo > maxInside) {
		t.Errorf("band does not widen beyond the data: width %g at n = %g, %g at the largest measured size, %g at most inside",
			last.Hi-last.Lo, last.N, widthAt3200, maxInside)
	}
	// BandOver over the same range gives the same band; over another, no refits needed.
	if again := res.BandOver(b[0].N, last.N, BandPoints); !reflect.DeepEqual(again, b) {
		t.Error("BandOver over the band's own range differs from Band")
	}
	if (&Result{}).BandOver(1, 10, 5) != nil {
		t.Error("BandOver without bootstrap refits should be nil")
	}
}

// The band is a pure function of the points, options and seed: two runs and one core versus
// two give the same band.
func TestBand_Deterministic(t *testing.T) {
	a := bandResult(t)
	prev := runtime.GOMAXPROCS(1)
	one := bandResult(t)
	runtime.GOMAXPROCS(2)
	two := bandResult(t)
	runtime.GOMAXPROCS(prev)
	if !reflect.DeepEqual(a.Band, one.Band) || !reflect.DeepEqual(one.Band, two.Band) {
		t.Error("band differs between runs or core counts")
	}
}

// BandPoint encodes as {"n","lo","hi"} with non-finite values as null.
func TestBandPoint_JSON(t *testing.T) {
	got, err := json.Marshal([]BandPoint{{N: 10, Lo: 0.1, Hi: 0.2}, {N: 20, Lo: math.NaN(), Hi: math.Inf(1)}})
	if err != nil {
		t.Fatal(err)
	}
	if want := `[{"n":10,"lo":0.1,"hi":0.2},{"n":20,"lo":null,"hi":null}]`; string(got) != want {
		t.Errorf("got %s, want %s", got, want)
	}
}

// The points plot draws the band and names it in the legend, deterministically.
func TestPlotPoints_Band(t *testing.T) {
	res := bandResult(t)
	render := func() string {
		p, err := PlotPoints(bandPoints(), nil, res, 0.13, 0, "band")
		if err != nil {
			t.Fatal(err)
		}
		w, err := p.WriterTo(6*vg.Inch, 4*vg.Inch, "svg")
		if err != nil {
			t.Fatal(err)
		}
		var buf bytes.Buffer
		if _, err := w.WriteTo(&buf); err != nil {
			t.Fatal(err)
		}
		return buf.String()
	}
	a, b := render(), render()
	if a != b {
		t.Error("two renderings differ")
	}
	if !strings.Contains(a, "95% band (bootstrap)") {
		t.Error("legend lacks the band")
	}
}

// BenchmarkBandOver is the cost of the band from 1000 kept refits, to compare with
// BenchmarkExtrapolate (which includes it) in the same run.
func BenchmarkBandOver(b *testing.B) {
	rng := rand.New(rand.NewPCG(3, 3))
	pts := pow3Points(rng, geomSizes(200, 8, 2), 5, 0.1, 2, 0.5, 0.002)
	res, err := Extrapolate(pts, &Options{Target: 0.12, At: 100000})
	if err != nil {
		b.Fatal(err)
	}
	end := BandEnd(res, 100000)
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		res.BandOver(res.Sizes[0], end, BandPoints)
	}
}
