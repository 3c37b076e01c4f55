package estimate

import (
	"math"
	"testing"

	"gonum.org/v1/gonum/mat"
)

// TestLinearLS_NIST checks LinearLS and PolyLS against the certified values of the NIST StRD
// linear regression datasets (testdata/nist, copied from the NIST StRD files; see the README
// there): every coefficient, its standard deviation, the residual standard deviation and R²
// to at least 7 significant digits (NIST's log relative error, LRE ≥ 7).
func TestLinearLS_NIST(t *testing.T) {
	tests := []struct {
		name    string
		degree  int  // polynomial degree in the single predictor; −1 = use the predictors as given
		noConst bool // no intercept (NoInt1, NoInt2)
	}{
		{"Norris", 1, false},
		{"Pontius", 2, false},
		{"NoInt1", -1, true},
		{"NoInt2", -1, true},
		{"Filip", 10, false},
		{"Longley", -1, false},
		{"Wampler1", 5, false},
		{"Wampler2", 5, false},
		{"Wampler3", 5, false},
		{"Wampler4", 5, false},
		{"Wampler5", 5, false},
	}
	const want = 7.0
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			f := readNIST(t, tt.name)
			var fit *LinearFit
			var err error
			if tt.degree >= 0 {
				fit, err = PolyLS(f.col(0), f.Y, tt.degree)
			} else {
				k := len(f.X[0])
				off := 1
				if tt.noConst {
					off = 0
				}
				X := mat.NewDense(len(f.Y), k+off, nil)
				for i, r := range f.X {
					if off == 1 {
						X.Set(i, 0, 1)
					}
					for j, v := range r {
						X.Set(i, j+off, v)
					}
				}
				fit, err = LinearLS(X, f.Y)
			}
			if err != nil {
				t.Fatal(err)
			}
			if len(fit.Coef) != len(f.Cert) {
				t.Fatalf("%d coefficients, NIST certifies %d", len(fit.Coef), len(f.Cert))
			}
			minLRE := 15.0
			for j := range fit.Coef {
				if d := sigDigits(fit.Coef[j], f.Cert[j]); d < want {
					t.Errorf("B%d = %.15g, certified %.15g (NIST StRD %s): %.1f digits", j, fit.Coef[j], f.Cert[j], tt.name, d)
				} else {
					minLRE = math.Min(minLRE, d)
				}
				if f.CertSD[j] == 0 {
					// exact fits (Wampler1, 2): certified SD 0
					if math.Abs(fit.StdErr[j]) > 1e-7*math.Max(math.Abs(f.Cert[j]), 1) {
						t.Errorf("SD(B%d) = %g, certified 0", j, fit.StdErr[j])
					}
				} else if d := sigDigits(fit.StdErr[j], f.CertSD[j]); d < want {
					t.Errorf("SD(B%d) = %.15g, certified %.15g: %.1f digits", j, fit.StdErr[j], f.CertSD[j], d)
				}
			}
			if f.ResidSD == 0 {
				if fit.ResidSD > 1e-7*math.Abs(f.Y[0]) {
					t.Errorf("residual SD %g, certified 0", fit.ResidSD)
				}
			} else if d := sigDigits(fit.ResidSD, f.ResidSD); d < want {
				t.Errorf("residual SD %.15g, certified %.15g: %.1f digits", fit.ResidSD, f.ResidSD, d)
			}
			if d := sigDigits(fit.R2, f.R2); d < want {
				t.Errorf("R² %.15g, certified %.15g: %.1f digits", fit.R2, f.R2, d)
			}
			t.Logf("%s: min LRE of coefficients %.1f, %d refinement sweeps", tt.name, minLRE, fit.Refinements)
		})
	}
}

// TestLinearLS_FilipPlainDesign records what the float64 design matrix (PolyDesign, powers
// rounded to double) achieves on Filip, for comparison with PolyLS's double-double powers.
func TestLinearLS_FilipPlainDesign(t *testing.T) {
	f := readNIST(t, "Filip")
	fit, err := LinearLS(PolyDesign(f.col(0), 10), f.Y)
	if err != nil {
		t.Fatal(err)
	}
	minLRE := 15.0
	for j := range fit.Coef {
		minLRE = math.Min(minLRE, sigDigits(fit.Coef[j], f.Cert[j]))
	}
	t.Logf("Filip with a float64 design: min LRE %.1f", minLRE)
	if minLRE < 6 {
		t.Errorf("Filip with a float64 design: only %.1f digits", minLRE)
	}
}

func BenchmarkPolyLS_Filip(b *testing.B) {
	f := readNIST(b, "Filip")
	x := f.col(0)
	for i := 0; i < b.N; i++ {
		if _, err := PolyLS(x, f.Y, 10); err != nil {
			b.Fatal(err)
		}
	}
}
