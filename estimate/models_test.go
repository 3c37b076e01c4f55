package estimate

import (
	"bufio"
	"context"
	"math"
	"os"
	"strconv"
	"strings"
	"sync"
	"testing"

	"gonum.org/v1/gonum/floats/scalar"
)

// filipData reads the data block of NIST StRD Filip (testdata/nist/Filip.dat, byte-identical
// to the NIST file; provenance in testdata/nist/README.md): lines 61–142, "y x".
func filipData(t testing.TB) (x, y []float64) {
	t.Helper()
	f, err := os.Open("testdata/nist/Filip.dat")
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	sc := bufio.NewScanner(f)
	for line := 1; sc.Scan(); line++ {
		if line < 61 {
			continue
		}
		fs := strings.Fields(sc.Text())
		if len(fs) != 2 {
			continue
		}
		yv, err1 := strconv.ParseFloat(fs[0], 64)
		xv, err2 := strconv.ParseFloat(fs[1], 64)
		if err1 != nil || err2 != nil {
			t.Fatalf("Filip.dat:%d: %q", line, sc.Text())
		}
		x, y = append(x, xv), append(y, yv)
	}
	if len(x) != 82 {
		t.Fatalf("Filip: %d observations, want 82", len(x))
	}
	return x, y
}

// Certified values, NIST StRD Filip (Filip.dat lines 31–55).
var filipCertified = []float64{
	-1467.48961422980, -2772.17959193342, -2316.37108160893, -1127.97394098372,
	-354.478233703349, -75.1242017393757, -10.8753180355343, -1.06221498588947,
	-0.670191154593408e-01, -0.246781078275479e-02, -0.402962525080404e-04,
}

const filipResidSD = 0.334801051324544e-02 // certified residual standard deviation

// rawPolyCoef converts coefficients c_k of ((x−μ)/σ)^k to coefficients of x^j:
// b_j = Σ_{k≥j} c_k σ^(−k) C(k,j) (−μ)^(k−j) (binomial expansion).
func rawPolyCoef(c []float64, mu, sd float64) []float64 {
	d := len(c) - 1
	b := make([]float64, d+1)
	for k := 0; k <= d; k++ {
		ck := c[k] / math.Pow(sd, float64(k))
		binom := 1.0
		for j := 0; j <= k; j++ {
			if j > 0 {
				binom = binom * float64(k-j+1) / float64(j)
			}
			b[j] += ck * binom * math.Pow(-mu, float64(k-j))
		}
	}
	return b
}

// The sweep's solver on NIST Filip (degree 10, no ridge): Cholesky on the standardised normal
// equations is refused as ill-conditioned and the system is re-solved by QR, which must give
// the certified parameters to at least 7 significant digits.
func TestSweep_NISTFilip(t *testing.T) {
	x, y := filipData(t)
	d := Data{X: x, Y: y, N: len(x), P: 1}
	var beta []float64
	var usedQR bool
	var mu sync.Mutex
	o := CurveOptions{Model: "ridge", Sizes: []int{82}, Repeats: 1, Metric: "mse", Ridge: -1}
	pts, stats, err := sweepRidgeStats(context.Background(), d, d, []int{10}, o, func(r, size, deg int, b []float64, q bool) {
		mu.Lock()
		defer mu.Unlock()
		beta, usedQR = append([]float64(nil), b...), q
	})
	if err != nil {
		t.Fatal(err)
	}
	if !usedQR || stats.QRSolves != 1 {
		t.Fatalf("Filip degree 10 was not detected as ill-conditioned (QR solves %d)", stats.QRSolves)
	}
	sc := newScaler(d)
	raw := rawPolyCoef(beta, sc.mean[0], sc.sd[0])
	for j, want := range filipCertified {
		if !scalar.EqualWithinRel(raw[j], want, 1e-7) {
			t.Errorf("B%d = %.15g, certified %.15g (rel err %.2g)", j, raw[j], want, math.Abs(raw[j]/want-1))
		}
	}
	// Training MSE = RSS/n; certified residual SD = sqrt(RSS/(n−11)).
	rss := pts[0].TrainErr * 82
	if got := math.Sqrt(rss / 71); !scalar.EqualWithinRel(got, filipResidSD, 1e-7) {
		t.Errorf("residual SD %.15g, certified %.15g", got, filipResidSD)
	}
}

// A well-conditioned system stays on the Cholesky path and agrees with QR.
func TestRidgeSolve_CholeskyAgreesWithQR(t *testing.T) {
	x, y := filipData(t)
	d := Data{X: x, Y: y, N: len(x), P: 1}
	sc := newScaler(d)
	basis, _ := newPolyBasis(1, 3, nil)
	m := basis.Terms(3)
	g := make([]float64, m*m)
	c := make([]float64, m)
	t4 := make([]float64, m)
	rows := make([][]float64, d.N)
	for i := 0; i < d.N; i++ {
		z := []float64{0}
		sc.apply(d.Row(i), z)
		basis.expand(z, t4)
		rows[i] = append([]float64(nil), t4...)
		accumulate(g, c, t4, y[i], m)
	}
	mirror(g, m)
	bc, cond, ok := ridgeSolve(g, c, m, 0)
	if !ok {
		t.Fatalf("cubic refused by Cholesky (cond %g)", cond)
	}
	bq, err := qrSolve(d.N, m, func(i int, dst []float64) { copy(dst, rows[i]) }, func(i int) float64 { return y[i] }, 0)
	if err != nil {
		t.Fatal(err)
	}
	for j := range bc {
		if !scalar.EqualWithinAbsOrRel(bc[j], bq[j], 1e-12, 1e-9) {
			t.Errorf("coef %d: cholesky %g, qr %g", j, bc[j], bq[j])
		}
	}
}

func TestPolyBasis_GradedOrderAndIndicatorGroups(t *testing.T) {
	b, err := newPolyBasis(3, 3, nil)
	if err != nil {
		t.Fatal(err)
	}
	// C(3+d, d) terms up to degree d: 1, 4, 10, 20.
	for d, want := range []int{1, 4, 10, 20} {
		if got := b.Terms(d); got != want {
			t.Errorf("terms up to degree %d: %d, want %d", d, got, want)
		}
	}
	out := make([]float64, 20)
	b.expand([]float64{2, 3, 5}, out)
	want := []float64{1, 2, 3, 5, 4, 6, 10, 9, 15, 25, 8, 12, 20, 18, 30, 50, 27, 45, 75, 125}
	for i := range want {
		if out[i] != want[i] {
			t.Fatalf("expansion %v, want %v", out, want)
		}
	}
	// Columns 1 and 2 are one categorical's indicators: no x1², x1·x2, x2²; x0 is continuous.
	g, _ := newPolyBasis(3, 2, []int{-1, 0, 0})
	if got := g.Terms(2); got != 4+3 { // 1, x0, x1, x2, x0², x0x1, x0x2
		t.Errorf("terms with an indicator group: %d, want 7", got)
	}
	// Column 2 linear only: 1, x0, x1, x2, then x0², x0x1, x1² and cubes of x0, x1 only.
	l, _ := newPolyBasis(3, 3, []int{-1, -1, LinearOnly})
	if got := l.Terms(3); got != 4+3+4 {
		t.Errorf("terms with a linear-only column: %d, want 11", got)
	}
}

// Logistic regression against scikit-learn 1.2.1 (Debian python3-sklearn), produced by
//
//	rng = np.random.default_rng(20261202); X = np.round(rng.normal(size=(40, 2)), 3)
//	p = 1/(1+np.exp(-(0.5 + 1.5*X[:,0] - 1.0*X[:,1] + 0.8*X[:,0]*X[:,1])))
//	y = (rng.uniform(size=40) < p).astype(float)
//	Z = StandardScaler().fit_transform(X)
//	F = PolynomialFeatures(deg, include_bias=False).fit_transform(Z)
//	m = LogisticRegression(C=1.0, solver='newton-cholesky', tol=1e-14, max_iter=1000).fit(F, y)
//
// (m.intercept_, m.coef_ for deg = 1 and 2; 6 Newton iterations each. The default lbfgs
// solver with tol=1e-12 stops about 2e-6 short of this optimum.) PolynomialFeatures orders degree-2 terms
// x0², x0·x1, x1², the graded order polyBasis uses.
var refX = []float64{-0.045, 0.379, 1.655, -1.741, 1.476, 0.641, -0.07, -1.241, -0.526, -0.984, -1.022, -0.176, 0.771, -1.444, -1.91, -0.959, -0.887, -0.601, -0.172, 1.255, 0.004, 0.049, -0.029, 0.534, 1.141, 1.096, 0.65, -1.18, 0.639, -0.135, 0.34, 1.635, -2.641, -0.818, 0.552, -0.423, -0.032, -0.338, 1.93, 0.225, -0.237, -0.218, 0.58, 1.504, -0.093, 1.235, 0.119, -1.97, 1.191, -2.137, 0.093, 1.362, 1.602, 0.422, -1.695, 1.089, -0.17, -0.848, -0.278, -1.11, -0.507, -0.627, 0.082, -0.258, 0.494, 1.057, -1.022, -2.567, 1.497, -0.469, 0.104, -1.395, 0.775, 0.156, -0.094, 1.639, -0.149, -0.719, 0.194, 0.535}
var refY = []float64{0, 1, 1, 1, 1, 0, 1, 1, 0, 1, 0, 1, 1, 1, 0, 1, 0, 1, 1, 1, 1, 0, 0, 1, 1, 1, 1, 0, 1, 1, 0, 0, 1, 1, 1, 1, 1, 0, 1, 0}

func TestFitLogistic_AgainstSklearn(t *testing.T) {
	d := Data{X: refX, Y: refY, N: 40, P: 2}
	tests := []struct {
		deg  int
		want []float64 // intercept, then coef_
	}{
		{1, []float64{0.9494005289279283, 1.00323171165306, -0.8339888544084636}},
		{2, []float64{0.40836773492229755, 1.0744433888906582, -1.0815870376915373, 0.023871978897107366, 0.4265230403882087, 0.6138111605211802}},
	}
	for _, tt := range tests {
		m, err := FitLogistic(d, tt.deg, 1)
		if err != nil {
			t.Fatal(err)
		}
		for j, w := range tt.want {
			if !scalar.EqualWithinAbsOrRel(m.Coef[j], w, 1e-10, 1e-9) {
				t.Errorf("degree %d coef %d: %.12g, sklearn %.12g", tt.deg, j, m.Coef[j], w)
			}
		}
	}
}

func TestFitLogistic_ConstantLabel(t *testing.T) {
	d := Data{X: refX, Y: make([]float64, 40), N: 40, P: 2}
	if _, err := FitLogistic(d, 1, 1); err == nil || !strings.Contains(err.Error(), "constant") {
		t.Fatalf("constant label: err %v", err)
	}
}

// kNN predictions against scikit-learn 1.2.1, produced by (continuing the script above)
//
//	Q = np.round(rng.normal(size=(6, 2)), 3)
//	yr = np.round(X[:,0]**2 + X[:,1] + rng.normal(scale=0.3, size=40), 3)
//	sc = StandardScaler().fit(X)
//	KNeighborsRegressor(n_neighbors=k, algorithm='brute').fit(sc.transform(X), yr).predict(sc.transform(Q))
//	KNeighborsClassifier(n_neighbors=k, algorithm='brute').fit(sc.transform(X), y).predict_proba(sc.transform(Q))[:,1]
func TestKNN_AgainstSklearn(t *testing.T) {
	q := [][]float64{{1.2, 0.097}, {-1.017, 1.186}, {-0.924, -0.907}, {0.036, -0.188}, {-0.754, 2.18}, {-1.0, 0.458}}
	yr := []float64{0.247, 1.469, 2.676, -0.593, -0.955, 0.655, -0.538, 2.184, -0.046, 1.452, 0.093, 0.094, 2.884, -1.123, 0.68, 1.643, 6.884, -0.581, -0.285, 3.648, -0.201, 2.005, 1.442, -2.205, -1.177, 1.269, 2.565, 3.743, -0.719, -1.341, -0.309, -0.278, 1.083, -1.901, 1.815, -1.326, 0.869, 1.366, -0.301, 1.222}
	tests := []struct {
		k        int
		reg, cls []float64
	}{
		{1, []float64{0.869, 3.743, -0.046, -0.278, 1.366, 0.655}, []float64{1, 0, 0, 0, 0, 0}},
		{5, []float64{1.721, 1.8544, -0.39919999999999994, -0.1944, 1.4344, 0.8795999999999999}, []float64{0.8, 0.4, 0.4, 0.6, 0.6, 0.2}},
	}
	for _, tt := range tests {
		reg, err := FitKNN(Data{X: refX, Y: yr, N: 40, P: 2}, tt.k)
		if err != nil {
			t.Fatal(err)
		}
		cls, _ := FitKNN(Data{X: refX, Y: refY, N: 40, P: 2}, tt.k)
		for i, x := range q {
			if got := reg.Predict(x); !scalar.EqualWithinAbsOrRel(got, tt.reg[i], 1e-12, 1e-12) {
				t.Errorf("k=%d regressor at %v: %g, sklearn %g", tt.k, x, got, tt.reg[i])
			}
			if got := cls.Predict(x); !scalar.EqualWithinAbsOrRel(got, tt.cls[i], 1e-12, 1e-12) {
				t.Errorf("k=%d classifier P(1) at %v: %g, sklearn %g", tt.k, x, got, tt.cls[i])
			}
		}
	}
}

// The k-d tree finds exactly the neighbours brute force finds.
func TestKDTree_MatchesBruteForce(t *testing.T) {
	n, p := 3000, 3
	pts := make([]float64, n*p)
	s := uint64(7)
	for i := range pts { // xorshift, deterministic
		s ^= s << 13
		s ^= s >> 7
		s ^= s << 17
		pts[i] = float64(s%10000) / 1000
	}
	tree := newKDTree(pts, n, p)
	for qi := 0; qi < 50; qi++ {
		q := pts[qi*p : (qi+1)*p]
		got := tree.knn([]float64{q[0] + 0.01, q[1], q[2] - 0.02}, 7, nil)
		var all []neighbour
		for i := 0; i < n; i++ {
			var d2 float64
			for j := 0; j < p; j++ {
				e := pts[i*p+j] - []float64{q[0] + 0.01, q[1], q[2] - 0.02}[j]
				d2 += e * e
			}
			all = append(all, neighbour{d2, i})
		}
		for k := 0; k < 7; k++ { // selection of the 7 smallest by (d2, idx)
			best := k
			for i := k + 1; i < len(all); i++ {
				if all[i].d2 < all[best].d2 || (all[i].d2 == all[best].d2 && all[i].idx < all[best].idx) {
					best = i
				}
			}
			all[k], all[best] = all[best], all[k]
			if got[k] != all[k] {
				t.Fatalf("query %d neighbour %d: tree %v, brute force %v", qi, k, got[k], all[k])
			}
		}
	}
}
