package ingest

import (
	"bufio"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
)

// readNIST returns the data block of a NIST StRD univariate file (the lines after "Data: Y"
// and its dashed rule).
func readNIST(t testing.TB, name string) []float64 {
	t.Helper()
	f, err := os.Open(filepath.Join("testdata", "nist", name+".dat"))
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	var xs []float64
	in := false
	sc := bufio.NewScanner(f)
	for sc.Scan() {
		line := strings.TrimSpace(sc.Text())
		switch {
		case strings.HasPrefix(line, "Data: Y"):
			in = true
		case !in || line == "" || strings.HasPrefix(line, "---"):
		default:
			v, err := strconv.ParseFloat(line, 64)
			if err != nil {
				t.Fatalf("%s: %v", name, err)
			}
			xs = append(xs, v)
		}
	}
	return xs
}

// lre is the log relative error (number of correct significant digits) of got against want,
// as NIST and McCullough use it; 16 stands for "exact in float64".
func lre(got, want float64) float64 {
	if got == want {
		return 16
	}
	if want == 0 {
		return -math.Log10(math.Abs(got))
	}
	return -math.Log10(math.Abs(got-want) / math.Abs(want))
}

func TestMeanSD_NISTStRD(t *testing.T) {
	tests := []struct {
		name          string
		n             int
		mean, sd      float64 // NIST StRD certified values (the .dat header of each file)
		minMeanLRE    float64
		minSDLRE      float64
		binarySD      float64 // exact SD of the float64 inputs, see below; 0 = same as sd
		whyLowerSDLRE string
	}{
		// NIST StRD Lew.dat: ybar = -177.435000000000, s = 277.332168044316
		{name: "Lew", n: 200, mean: -177.435000000000, sd: 277.332168044316, minMeanLRE: 15, minSDLRE: 14.5},
		// NIST StRD Lottery.dat: ybar = 518.958715596330, s = 291.699727470969
		{name: "Lottery", n: 218, mean: 518.958715596330, sd: 291.699727470969, minMeanLRE: 14.5, minSDLRE: 14.5},
		// NIST StRD Mavro.dat: ybar = 2.00185600000000, s = 0.000429123454003053
		{name: "Mavro", n: 50, mean: 2.00185600000000, sd: 0.000429123454003053, minMeanLRE: 15, minSDLRE: 13,
			binarySD:      0.0004291234540030854092852461892175543923674,
			whyLowerSDLRE: "the decimal inputs are not exact in float64; the binary inputs' own SD differs from NIST's at the 14th digit"},
		// NIST StRD Michelso.dat: ybar = 299.852400000000, s = 0.0790105478190518
		{name: "Michelso", n: 100, mean: 299.852400000000, sd: 0.0790105478190518, minMeanLRE: 15, minSDLRE: 13.5,
			binarySD:      0.07901054781905066715148854018405578216408,
			whyLowerSDLRE: "the decimal inputs are not exact in float64; the binary inputs' own SD differs from NIST's at the 14th digit"},
		// NIST StRD NumAcc1.dat: ybar = 10000002 (exact), s = 1 (exact)
		{name: "NumAcc1", n: 3, mean: 10000002, sd: 1, minMeanLRE: 15, minSDLRE: 15},
		// NIST StRD NumAcc2.dat: ybar = 1.2, s = 0.1 (exact in decimal)
		{name: "NumAcc2", n: 1001, mean: 1.2, sd: 0.1, minMeanLRE: 15, minSDLRE: 14,
			binarySD: 0.09999999999999997779553950749686925309556},
		// NIST StRD NumAcc3.dat: ybar = 1000000.2, s = 0.1 (exact in decimal)
		{name: "NumAcc3", n: 1001, mean: 1000000.2, sd: 0.1, minMeanLRE: 15, minSDLRE: 9.4,
			binarySD:      0.1000000000349245965480973680711414655844,
			whyLowerSDLRE: "1000000.1 etc. are not representable in float64; the binary inputs' own SD differs from 0.1 at the 10th digit"},
		// NIST StRD NumAcc4.dat: ybar = 10000000.2, s = 0.1 (exact in decimal)
		{name: "NumAcc4", n: 1001, mean: 10000000.2, sd: 0.1, minMeanLRE: 15, minSDLRE: 8.2,
			binarySD:      0.1000000005587935447736195855645186921708,
			whyLowerSDLRE: "10000000.1 etc. are not representable in float64 (ulp 1.9e-9); the binary inputs' own SD differs from 0.1 at the 9th digit"},
	}
	// binarySD: the exact sample SD of the float64 values the file parses to, computed in
	// rational arithmetic with /usr/bin/python3 (fractions.Fraction of each float, exact mean and
	// sum of squares, 40-digit decimal square root):
	//   fr=[Fraction(float(l)) for l in data]; m=sum(fr)/n; v=sum((x-m)**2 for x in fr)/(n-1)
	//   getcontext().prec=40; (Decimal(v.numerator)/Decimal(v.denominator)).sqrt()
	// It is the best any float64 algorithm can reach; we require 14 digits against it. (The same
	// computation on the decimal strings, Fraction(text), reproduces NIST's certified values,
	// e.g. Mavro 0.000429123454003052837…, Michelso 0.0790105478190517716…: so where the LRE
	// against NIST is below 14 the limit is the float64 input, not the algorithm.)
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			x := readNIST(t, tt.name)
			if len(x) != tt.n {
				t.Fatalf("read %d values, NIST header says %d", len(x), tt.n)
			}
			m, s := MeanSD(x)
			if got := lre(m, tt.mean); got < tt.minMeanLRE {
				t.Errorf("mean = %.17g, NIST certified %.17g: LRE %.1f < %.1f", m, tt.mean, got, tt.minMeanLRE)
			}
			if got := lre(s, tt.sd); got < tt.minSDLRE {
				t.Errorf("sd = %.17g, NIST certified %.17g: LRE %.1f < %.1f (%s)", s, tt.sd, got, tt.minSDLRE, tt.whyLowerSDLRE)
			}
			if tt.binarySD != 0 {
				if got := lre(s, tt.binarySD); got < 14 {
					t.Errorf("sd = %.17g, exact SD of the float64 inputs %.17g: LRE %.1f < 14", s, tt.binarySD, got)
				}
			}
			if got := Mean(x); got != m {
				t.Errorf("Mean = %.17g, MeanSD's mean = %.17g", got, m)
			}
		})
	}
}

// The naive one-pass formula sqrt((Σx² − n·mean²)/(n−1)) fails NumAcc4 completely; this
// guards against a regression to it (common practice, no source: the reason NumAcc4 exists).
func TestMeanSD_NumAcc4BeatsNaive(t *testing.T) {
	x := readNIST(t, "NumAcc4")
	var s, s2 float64
	for _, v := range x {
		s += v
		s2 += v * v
	}
	n := float64(len(x))
	naive := math.Sqrt(math.Abs(s2-s*s/n) / (n - 1))
	_, sd := MeanSD(x)
	if lre(naive, 0.1) > 3 {
		t.Skipf("naive formula happened to be accurate (%g)", naive)
	}
	if lre(sd, 0.1) < 8 {
		t.Errorf("sd = %.17g", sd)
	}
}

func TestMeanSD_Edges(t *testing.T) {
	m, s := MeanSD(nil)
	if !math.IsNaN(m) || !math.IsNaN(s) {
		t.Errorf("empty: %v %v", m, s)
	}
	m, s = MeanSD([]float64{4})
	if m != 4 || !math.IsNaN(s) {
		t.Errorf("one value: %v %v", m, s)
	}
	m, s = MeanSD([]float64{7, 7, 7})
	if m != 7 || s != 0 {
		t.Errorf("constant: %v %v", m, s)
	}
}

func TestQuantile_Type7(t *testing.T) {
	// Cross-checked with /usr/bin/python3, numpy 1.24.2 (numpy.percentile's default method is
	// Hyndman–Fan type 7):
	//   numpy.percentile([10,30,5,25,40,20,10,15,30,20,15,20,85,15,65,15,60,60,40,45], [5,25,50,75,95])
	//   -> [9.75, 15.0, 22.5, 41.25, 66.00000000000001]
	ny := []float64{10, 30, 5, 25, 40, 20, 10, 15, 30, 20, 15, 20, 85, 15, 65, 15, 60, 60, 40, 45}
	got := Quantiles(ny, 0.05, 0.25, 0.5, 0.75, 0.95)
	want := []float64{9.75, 15.0, 22.5, 41.25, 66.00000000000001}
	for i := range want {
		if math.Abs(got[i]-want[i]) > 1e-12 {
			t.Errorf("quantile %d = %v, numpy %v", i, got[i], want[i])
		}
	}
	tests := []struct {
		name string
		x    []float64
		p    float64
		want float64
	}{
		{"empty", nil, 0.5, math.NaN()},
		{"one", []float64{3}, 0.9, 3},
		{"min", []float64{1, 2, 3}, 0, 1},
		{"max", []float64{1, 2, 3}, 1, 3},
		{"p out of range", []float64{1, 2}, 1.5, math.NaN()},
		{"midpoint", []float64{1, 2}, 0.5, 1.5},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			got := Quantile(tt.x, tt.p)
			if !(got == tt.want || math.IsNaN(got) && math.IsNaN(tt.want)) {
				t.Errorf("Quantile = %v, want %v", got, tt.want)
			}
		})
	}
}

func TestTukeyFences_Textbook(t *testing.T) {
	// Travel times to work (minutes) of 15 North Carolina workers, in D. S. Moore, W. I. Notz,
	// M. A. Fligner, The Basic Practice of Statistics, 7th ed., W. H. Freeman, ch. 2,
	// "Apply your knowledge" 2.8, p. 57 (data and location as cited by a public solutions page;
	// the book itself was not at hand). With the book's quartiles (medians of the lower and
	// upper halves) Q1 = 10, Q3 = 30, IQR = 20, and the 1.5·IQR rule gives fences −20 and 60:
	// the longest time, 60, lies ON the upper fence, so it is not "more than 1.5·IQR above Q3".
	// numpy agrees on the quartiles: numpy.percentile(nc, [25, 75]) -> [10.0, 30.0].
	nc := []float64{30, 20, 10, 40, 25, 20, 10, 60, 15, 40, 5, 30, 12, 10, 10}
	q := Quantiles(nc, 0.25, 0.75)
	if q[0] != 10 || q[1] != 30 {
		t.Fatalf("quartiles %v, book and numpy: 10, 30", q)
	}
	f := TukeyFences(q[0], q[1], 1.5)
	if f.IQR != 20 || f.Low != -20 || f.High != 60 {
		t.Errorf("fences %+v, book: IQR 20, -20 .. 60", f)
	}
	for _, v := range nc {
		if f.Outside(v) {
			t.Errorf("%v flagged; the book's rule flags nothing (60 is on the fence)", v)
		}
	}

	// Travel times of 20 New York workers (same book family, from memory): the book's quartiles
	// (medians of halves) are Q1 = 15, Q3 = 42.5, so Q3 + 1.5·IQR = 83.75 and 85 is an outlier.
	// Type-7 quartiles differ (numpy.percentile(ny, [25, 75]) -> [15.0, 41.25]) and give the
	// upper fence 41.25 + 1.5·26.25 = 80.625: the same verdict.
	ny := []float64{10, 30, 5, 25, 40, 20, 10, 15, 30, 20, 15, 20, 85, 15, 65, 15, 60, 60, 40, 45}
	book := TukeyFences(15, 42.5, 1.5)
	if book.High != 83.75 || !book.Outside(85) || book.Outside(65) {
		t.Errorf("book fences %+v", book)
	}
	q = Quantiles(ny, 0.25, 0.75)
	f = TukeyFences(q[0], q[1], 1.5)
	if f.High != 80.625 || f.Low != -24.375 {
		t.Errorf("type-7 fences %+v", f)
	}
	var out []float64
	for _, v := range ny {
		if TukeyOutlier(v, q[0], q[1]) {
			out = append(out, v)
		}
	}
	if len(out) != 1 || out[0] != 85 {
		t.Errorf("outliers %v, want [85]", out)
	}
}
