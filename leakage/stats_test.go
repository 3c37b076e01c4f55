package leakage

import (
	"math"
	"testing"

	"gonum.org/v1/gonum/floats/scalar"
)

func seq(lo, n int, f func(int) float64) []float64 {
	out := make([]float64, n)
	for i := range out {
		out[i] = f(lo + i)
	}
	return out
}

func TestKS2_AgainstScipy(t *testing.T) {
	x25 := []float64{0.61, 0.29, 0.06, 0.59, -1.73, -0.74, 0.51, -0.56, 0.39, 1.64, 0.05, -0.06, 0.64, -0.82, 0.37, 1.77, 1.09, -1.28, 2.36, 1.31, 1.05, -0.32, -0.4, 1.06, -2.47}
	y20 := []float64{2.2, 1.66, 1.38, 0.2, 0.36, 0.0, 0.96, 1.56, 0.44, 1.5, -0.3, 0.66, 2.31, 3.29, -0.27, -0.37, 0.38, 0.7, 0.52, -0.55}
	tests := []struct {
		name string
		x, y []float64
		d, p float64
		src  string
	}{
		// scipy test suite (scipy/stats/tests/test_stats.py, TestKSTwoSamples), and
		// scipy 1.10.1 ks_2samp([1.01, 2.01], [1, 2, 3], method='exact') -> D=0.3333333333333333, p=1.0
		{"scipy suite 1", []float64{1.01, 2.01}, []float64{1, 2, 3}, 1.0 / 3, 1.0, "scipy"},
		// ks_2samp([0.99, 1.99], [1, 2, 3], method='exact') -> D=0.6666666666666666, p=0.6
		{"scipy suite 2", []float64{0.99, 1.99}, []float64{1, 2, 3}, 2.0 / 3, 0.6, "scipy"},
		// ks_2samp(x25, y20, method='exact') -> D=0.24, p=0.4743341655515452
		{"25 vs 20", x25, y20, 0.24, 0.4743341655515452, "scipy"},
		// ks_2samp([1,2,2,3,3,3,4,5],[2,3,4,4,5,6,6], method='exact') -> D=0.4642857142857143, p=0.31313131313131315
		{"ties", []float64{1, 2, 2, 3, 3, 3, 4, 5}, []float64{2, 3, 4, 4, 5, 6, 6}, 0.4642857142857143, 0.31313131313131315, "scipy"},
		// ks_2samp(range(40), [v+7.5 for v in range(40)], method='exact') -> D=0.2, p=0.404587405685253
		{"equal sizes", seq(0, 40, func(i int) float64 { return float64(i) }), seq(0, 40, func(i int) float64 { return float64(i) + 7.5 }), 0.2, 0.404587405685253, "scipy"},
		// ks_2samp(range(60), [v*1.3+4 for v in range(50)], method='exact') -> D=0.14666666666666667, p=0.5495636767315052
		{"60 vs 50", seq(0, 60, func(i int) float64 { return float64(i) }), seq(0, 50, func(i int) float64 { return float64(i)*1.3 + 4 }), 0.14666666666666667, 0.5495636767315052, "scipy"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			r := KS2(append([]float64(nil), tt.x...), append([]float64(nil), tt.y...))
			if !scalar.EqualWithinAbsOrRel(r.D, tt.d, 1e-12, 1e-12) {
				t.Errorf("D = %v, want %v (%s)", r.D, tt.d, tt.src)
			}
			if r.Method != "exact" || !scalar.EqualWithinAbsOrRel(r.P, tt.p, 1e-9, 1e-9) {
				t.Errorf("p = %v (%s), want %v exact (%s)", r.P, r.Method, tt.p, tt.src)
			}
		})
	}
}

func TestKolmogorovSurvival_AgainstScipy(t *testing.T) {
	// scipy 1.10.1 scipy.stats.kstwobign.sf(lam): the asymptotic Kolmogorov distribution.
	tests := []struct{ lam, want float64 }{
		{0.5, 0.9639452436648751},
		{0.8, 0.5441424115741981},
		{1.0, 0.26999967167735456},
		{1.5, 0.022217962616525127},
		{2.0, 0.0006709252557796953},
	}
	for _, tt := range tests {
		if got := KolmogorovSurvival(tt.lam); !scalar.EqualWithinAbsOrRel(got, tt.want, 1e-12, 1e-10) {
			t.Errorf("Q(%v) = %v, want %v (scipy kstwobign.sf)", tt.lam, got, tt.want)
		}
	}
	// The 25-vs-20 sample above: sqrt(25·20/45)·0.24 = 0.8, scipy kstwobign.sf(0.8) =
	// 0.5441424115741981. (scipy's method='asymp' uses the finite-n kstwo distribution at
	// round(en) and gives 0.47829906309839576; the limiting form is the one stated here.)
	if got := KSAsymptoticP(25, 20, 0.24); !scalar.EqualWithinAbsOrRel(got, 0.5441424115741981, 1e-10, 1e-10) {
		t.Errorf("asymptotic p = %v", got)
	}
}

func TestChiSquare_Agresti(t *testing.T) {
	// Agresti, Categorical Data Analysis (party identification by gender):
	// X² = 30.0701, df 2, p = 2.954e-07. scipy 1.10.1 chi2_contingency(t) ->
	// statistic=30.070149095754672, pvalue=2.9535891832117595e-07, dof=2;
	// scipy.stats.contingency.association(t, method='cramer') -> 0.10443580235646777.
	r := ChiSquare([][]float64{{762, 327, 468}, {484, 239, 477}})
	if !scalar.EqualWithinAbsOrRel(r.X2, 30.070149095754672, 1e-9, 1e-9) || r.DF != 2 {
		t.Errorf("X2 = %v df %d", r.X2, r.DF)
	}
	if !scalar.EqualWithinAbsOrRel(r.P, 2.9535891832117595e-07, 1e-12, 1e-6) {
		t.Errorf("p = %v", r.P)
	}
	if !scalar.EqualWithinAbsOrRel(r.CramersV, 0.10443580235646777, 1e-12, 1e-9) {
		t.Errorf("V = %v", r.CramersV)
	}
	// Empty columns are dropped (constructed: adding a zero column changes nothing).
	r2 := ChiSquare([][]float64{{762, 0, 327, 468}, {484, 0, 239, 477}})
	if r2.X2 != r.X2 || r2.DF != 2 {
		t.Errorf("zero column: %+v", r2)
	}
}

func TestAUC(t *testing.T) {
	// scipy docs example for mannwhitneyu: males [19,22,16,29,24], females [20,11,17,12]:
	// U = 17.0 of 5·4 = 20 -> AUC 0.85 (scipy 1.10.1 mannwhitneyu(...).statistic = 17.0).
	score := []float64{19, 22, 16, 29, 24, 20, 11, 17, 12}
	pos := []bool{true, true, true, true, true, false, false, false, false}
	if got := AUC(score, pos); !scalar.EqualWithinAbsOrRel(got, 0.85, 1e-15, 1e-15) {
		t.Errorf("AUC = %v, want 0.85", got)
	}
	// Ties: sklearn 1.2.1 roc_auc_score([0,0,1,1,1,0,1,0,1,1],
	// [0.1,0.4,0.4,0.8,0.4,0.2,0.9,0.8,0.3,0.4]) -> 0.7083333333333334.
	y := []int{0, 0, 1, 1, 1, 0, 1, 0, 1, 1}
	s := []float64{0.1, 0.4, 0.4, 0.8, 0.4, 0.2, 0.9, 0.8, 0.3, 0.4}
	p := make([]bool, len(y))
	for i := range y {
		p[i] = y[i] == 1
	}
	if got := AUC(s, p); !scalar.EqualWithinAbsOrRel(got, 0.7083333333333334, 1e-12, 1e-12) {
		t.Errorf("AUC ties = %v", got)
	}
	if !math.IsNaN(AUC([]float64{1, 2}, []bool{true, true})) {
		t.Error("one class must give NaN")
	}
}

func TestSpearman_AgainstScipy(t *testing.T) {
	// scipy 1.10.1 spearmanr([1,2,2,3,4,5,5,5,9],[2,1,4,3,6,5,7,5,8]).statistic = 0.8633740137473309
	got := Spearman([]float64{1, 2, 2, 3, 4, 5, 5, 5, 9}, []float64{2, 1, 4, 3, 6, 5, 7, 5, 8})
	if !scalar.EqualWithinAbsOrRel(got, 0.8633740137473309, 1e-12, 1e-12) {
		t.Errorf("rho = %v", got)
	}
}

func TestPSI_HandWorked(t *testing.T) {
	// Hand-worked: expected shares (.25,.25,.25,.25), actual (.1,.2,.3,.4):
	// (−.15)ln(.4) + (−.05)ln(.8) + (.05)ln(1.2) + (.15)ln(1.6)
	// = .137444 + .011157 + .009116 + .070501 = 0.228217 (arithmetic checked with python's
	// math.log: 0.22821740957339182).
	got := PSI([]float64{25, 25, 25, 25}, []float64{10, 20, 30, 40})
	if !scalar.EqualWithinAbsOrRel(got, 0.22821740957339182, 1e-12, 1e-12) {
		t.Errorf("PSI = %v", got)
	}
	// Identical distributions: 0 (by construction).
	if got := PSI([]float64{3, 5, 2}, []float64{6, 10, 4}); math.Abs(got) > 1e-15 {
		t.Errorf("PSI same = %v", got)
	}
	// An empty bin uses the stated epsilon: (.5−1e-4)ln(.5/1e-4) + (.5−1)ln(.5/1)
	// (constructed; arithmetic by formula).
	want := (0.5-PSIEpsilon)*math.Log(0.5/PSIEpsilon) + (0.5-1)*math.Log(0.5)
	if got := PSI([]float64{0, 10}, []float64{5, 5}); !scalar.EqualWithinAbsOrRel(got, want, 1e-12, 1e-12) {
		t.Errorf("PSI empty bin = %v want %v", got, want)
	}
}

func TestQuantileEdges(t *testing.T) {
	// Constructed: 1..20 in deciles -> edges 2,4,...,18 (type-1 quantiles).
	ref := seq(1, 20, func(i int) float64 { return float64(i) })
	e := QuantileEdges(ref, 10)
	want := []float64{2, 4, 6, 8, 10, 12, 14, 16, 18}
	if len(e) != len(want) {
		t.Fatalf("edges %v", e)
	}
	for i := range e {
		if e[i] != want[i] {
			t.Fatalf("edges %v", e)
		}
	}
	if got := PSINumeric(ref, ref); got != 0 {
		t.Errorf("PSI self = %v", got)
	}
}

func TestHoldoutSE(t *testing.T) {
	// Formula sqrt(p(1-p)/n): p=0.1, n=900 -> sqrt(0.09/900) = 0.01 exactly.
	if got := HoldoutSE(0.1, 900); !scalar.EqualWithinAbsOrRel(got, 0.01, 1e-15, 1e-12) {
		t.Errorf("SE = %v", got)
	}
	// z_{0.975} = 1.959963984540054 (scipy.stats.norm.ppf(0.975)); detectable difference
	// 1.959963984540054·sqrt(2)·0.01 = 0.027718076...
	if got := MinDetectableDifference(0.1, 900, 0.05); !scalar.EqualWithinAbsOrRel(got, 1.959963984540054*math.Sqrt2*0.01, 1e-12, 1e-9) {
		t.Errorf("MDD = %v", got)
	}
	n := RowsToDetect(0.1, 0.02, 0.05)
	if MinDetectableDifference(0.1, n, 0.05) > 0.02 || MinDetectableDifference(0.1, n-1, 0.05) <= 0.02 {
		t.Errorf("RowsToDetect = %d not minimal", n)
	}
}
