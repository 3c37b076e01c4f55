package estimate

import (
	"math"
	"testing"
)

// TestRileyBinary_Published is the worked example of Riley et al., "Calculating the sample
// size required for developing a clinical prediction model", BMJ 2020;368:m441: inputs p = 24
// candidate parameters, anticipated Cox–Snell R² 0.288, outcome prevalence 0.174, shrinkage
// 0.9; published answer n = 662 (the optimism criterion binds), 115 events, 4.8 events per
// parameter. The three criteria's values were also computed with scipy 1.10.1:
//
//	/usr/bin/python3 -c "import math; from scipy.stats import norm; p,R,phi,S=24,0.288,0.174,0.9;
//	  mx=1-math.exp(2*(phi*math.log(phi)+(1-phi)*math.log(1-phi))); S2=R/(R+0.05*mx);
//	  print(mx, p/((S-1)*math.log(1-R/S)), S2, p/((S2-1)*math.log(1-R/S2)), (norm.ppf(0.975)/0.05)**2*phi*(1-phi))"
//	→ 0.6032086677670352 622.3058034960966 0.9052036952956451 661.0973427261007 220.84393101817696
func TestRileyBinary_Published(t *testing.T) {
	ss, err := RileyBinary(24, 0.288, 0.174, 0.9)
	if err != nil {
		t.Fatal(err)
	}
	if ss.N != 662 || ss.Binding != "optimism" {
		t.Errorf("n = %d binding %s; published 662, optimism", ss.N, ss.Binding)
	}
	if math.Round(ss.Events) != 115 || math.Round(ss.EPP*10)/10 != 4.8 {
		t.Errorf("events %g, EPP %g; published 115 and 4.8", ss.Events, ss.EPP)
	}
	want := map[string]int{"shrinkage": 623, "optimism": 662, "overall_risk": 221} // ceil of the scipy values above
	for _, c := range ss.Criteria {
		if c.N != want[c.Name] {
			t.Errorf("%s: n = %d, want %d", c.Name, c.N, want[c.Name])
		}
	}
	if math.Abs(MaxR2CS(0.174)-0.6032086677670352) > 1e-12 {
		t.Errorf("max R²_CS %.16g", MaxR2CS(0.174))
	}
	if math.Abs(ss.Criteria[1].Value-0.9052036952956451) > 1e-12 {
		t.Errorf("shrinkage for optimism %.16g", ss.Criteria[1].Value)
	}
}

func TestRileyBinary_BadInput(t *testing.T) {
	for _, c := range []struct {
		p                int
		r2, prev, shrink float64
	}{{0, 0.2, 0.2, 0.9}, {10, 0.2, 0, 0.9}, {10, 0.2, 1, 0.9}, {10, 0.7, 0.174, 0.9}, {10, 0.2, 0.2, 1.2}, {10, -0.1, 0.2, 0.9}} {
		if _, err := RileyBinary(c.p, c.r2, c.prev, c.shrink); err == nil {
			t.Errorf("%+v accepted", c)
		}
	}
}

// TestRileyContinuous checks the continuous-outcome criteria (Riley et al., Statistics in
// Medicine 2019;38:1262–1275, part I; formulas as stated in RileyContinuous, recalled from
// the paper, not copied from a worked example) against scipy 1.10.1:
//
//	residual SD, p = 10: smallest n with max(sqrt(chi2.ppf(.975,df)/df), sqrt(df/chi2.ppf(.025,df))) ≤ 1.1,
//	  df = n−p−1 → n = 244 (MMOE 1.0998482198608581 at n, 1.100084482872359 at n−1)
//	intercept, p = 10, R² = 0.5, mean 20, SD 8: smallest n with t.ppf(.975,n−p−1)·sqrt(64·0.5/n) ≤ 0.1·20 → 35
//
// and the algebra of (i) and (ii).
func TestRileyContinuous(t *testing.T) {
	ss, err := RileyContinuous(10, 0.5, 20, 8, 0.9)
	if err != nil {
		t.Fatal(err)
	}
	got := map[string]int{}
	for _, c := range ss.Criteria {
		got[c.Name] = c.N
	}
	// (i): 10 / ((0.9−1)·ln(1 − 0.5/0.9)) = 10/(0.1·0.81093) = 123.3… → 124
	// (ii): 1 + 10·0.5/0.05 = 101
	want := map[string]int{"shrinkage": ceilN(10 / (-0.1 * math.Log(1-0.5/0.9))), "optimism": 101, "residual_sd": 244, "intercept": 35}
	if want["shrinkage"] != 124 {
		t.Fatalf("shrinkage algebra: %d", want["shrinkage"])
	}
	for k, v := range want {
		if got[k] != v {
			t.Errorf("%s: n = %d, want %d", k, got[k], v)
		}
	}
	if ss.N != 244 || ss.Binding != "residual_sd" {
		t.Errorf("n = %d binding %s, want 244 residual_sd", ss.N, ss.Binding)
	}
	if d := ResidualSDMMOE(244 - 11); math.Abs(d-1.0998482198608581) > 1e-9 {
		t.Errorf("MMOE(233) = %.16g, scipy 1.0998482198608581", d)
	}
	// (ii) is exact: at n = 101 the optimism p(1−R²)/(n−1) is exactly 0.05
	if o := 10 * (1 - 0.5) / float64(101-1); o != 0.05 {
		t.Errorf("optimism at n = 101: %g", o)
	}
}

// TestOLSHoldoutMSE checks the algebra of σ²(1 + p/n) (fixed design) and σ²(1 + p/(n−p−1))
// (Gaussian random design), The Elements of Statistical Learning (Hastie, Tibshirani &
// Friedman, 2nd ed.), and their inverses.
func TestOLSHoldoutMSE(t *testing.T) {
	cases := []struct {
		sigma2 float64
		p, n   int
		design string
		want   float64
	}{
		{2, 10, 100, "fixed", 2.2},
		{2, 10, 111, "random", 2.2}, // 2·(1 + 10/100)
		{1, 5, 6, "random", inf},
		{1, 1, 1, "fixed", 2},
	}
	for _, c := range cases {
		got, err := OLSHoldoutMSE(c.sigma2, c.p, c.n, c.design)
		if err != nil || math.Abs(got-c.want) > 1e-12 && !(math.IsInf(got, 1) && math.IsInf(c.want, 1)) {
			t.Errorf("%+v: %g, %v", c, got, err)
		}
	}
	for _, d := range []string{"fixed", "random"} {
		n, err := OLSNForRatio(10, 1.1, d)
		if err != nil {
			t.Fatal(err)
		}
		at, _ := OLSHoldoutMSE(1, 10, n, d)
		before, _ := OLSHoldoutMSE(1, 10, n-1, d)
		if !(at <= 1.1+1e-12 && before > 1.1) {
			t.Errorf("%s: n = %d gives %g, n−1 gives %g", d, n, at, before)
		}
	}
	if _, err := OLSHoldoutMSE(1, 2, 10, "other"); err == nil {
		t.Error("bad design accepted")
	}
}
