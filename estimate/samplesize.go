package estimate

import (
	"errors"
	"fmt"
	"math"

	"gonum.org/v1/gonum/stat/distuv"
)

// FormulaCaution is attached to every closed-form result.
const FormulaCaution = "These are planning estimates, not guarantees: they assume the anticipated R² and outcome figures hold. Clinical prediction models need qualified statistical review; defer to local rules."

// Criterion is one sample-size criterion.
type Criterion struct {
	Name  string  // shrinkage, optimism, overall_risk, residual_sd, intercept
	Doc   string  // what it guarantees
	N     int     // the smallest n meeting it
	Value float64 // the criterion's own figure (required shrinkage, margin, MMOE …)
	Binds bool    // this criterion gives the largest n
}

// SampleSize is the result of RileyBinary or RileyContinuous.
type SampleSize struct {
	Outcome   string // binary | continuous
	Params    int    // candidate predictor parameters p
	Criteria  []Criterion
	N         int     // the largest n over the criteria: the recommended minimum
	Binding   string  // the criterion that gives N
	Events    float64 // binary: N·prevalence (expected events)
	EPP       float64 // binary: events per candidate parameter; continuous: N/p
	Shrinkage float64 // the target expected shrinkage S
	Caution   string
}

// Defaults of the criteria, as in Riley et al.
const (
	DefaultShrinkage = 0.9  // expected uniform shrinkage factor S ≥ 0.9
	OptimismDelta    = 0.05 // absolute difference between apparent and adjusted R² ≤ 0.05
	RiskMargin       = 0.05 // overall risk within ± 0.05 (95% confidence)
	MMOETarget       = 1.1  // multiplicative margin of error ≤ 1.1 (continuous)
)

var errBadSampleInput = errors.New("bad sample-size input")

// nShrinkage is n = p / ((S − 1)·ln(1 − R²_CS/S)), the n at which the expected uniform
// shrinkage factor is S (Riley et al., BMJ 2020;368:m441, criterion (i), from van
// Houwelingen's heuristic shrinkage estimator).
func nShrinkage(p int, r2cs, S float64) float64 {
	return float64(p) / ((S - 1) * math.Log(1-r2cs/S))
}

// MaxR2CS is the largest Cox–Snell R² a binary outcome of prevalence φ allows:
// 1 − (φ^φ (1−φ)^(1−φ))², i.e. 1 − exp(2·lnL_null/n) (Riley et al. 2020, box 1).
func MaxR2CS(prevalence float64) float64 {
	phi := prevalence
	lnL := phi*math.Log(phi) + (1-phi)*math.Log(1-phi)
	return 1 - math.Exp(2*lnL)
}

// RileyBinary computes the three criteria of Riley et al. (BMJ 2020;368:m441; Statistics in
// Medicine 2019;38:1276–1296, part II) for a binary-outcome prediction model with p
// candidate parameters, anticipated Cox–Snell R² r2cs and outcome prevalence:
//
//	(i)   shrinkage:    n = p / ((S−1) ln(1 − R²_CS/S)), S = shrinkage (default 0.9)
//	(ii)  optimism:     the same with S = R²_CS/(R²_CS + δ·max R²_CS), δ = 0.05, so that
//	                    apparent and adjusted Nagelkerke R² differ by at most 0.05
//	(iii) overall risk: n = (1.96/0.05)² φ(1−φ), the outcome proportion within ± 0.05
//
// shrinkage 0 means DefaultShrinkage.
func RileyBinary(p int, r2cs, prevalence, shrinkage float64) (*SampleSize, error) {
	if shrinkage == 0 {
		shrinkage = DefaultShrinkage
	}
	if p < 1 {
		return nil, fmt.Errorf("%w: parameters %d must be at least 1", errBadSampleInput, p)
	}
	if !(prevalence > 0 && prevalence < 1) {
		return nil, fmt.Errorf("%w: prevalence %g must lie in (0, 1)", errBadSampleInput, prevalence)
	}
	if !(shrinkage > 0 && shrinkage < 1) {
		return nil, fmt.Errorf("%w: shrinkage %g must lie in (0, 1)", errBadSampleInput, shrinkage)
	}
	maxR2 := MaxR2CS(prevalence)
	if !(r2cs > 0 && r2cs < maxR2) {
		return nil, fmt.Errorf("%w: Cox–Snell R² %g must lie in (0, %.4g), the largest a prevalence of %g allows", errBadSampleInput, r2cs, maxR2, prevalence)
	}
	if r2cs >= shrinkage {
		return nil, fmt.Errorf("%w: Cox–Snell R² %g must be below the shrinkage %g", errBadSampleInput, r2cs, shrinkage)
	}
	s2 := r2cs / (r2cs + OptimismDelta*maxR2)
	z := stdNormal.Quantile(0.975)
	n3 := (z / RiskMargin) * (z / RiskMargin) * prevalence * (1 - prevalence)
	crit := []Criterion{
		{Name: "shrinkage", Doc: fmt.Sprintf("expected uniform shrinkage ≥ %g (little overfitting)", shrinkage), N: ceilN(nShrinkage(p, r2cs, shrinkage)), Value: shrinkage},
		{Name: "optimism", Doc: fmt.Sprintf("apparent − adjusted Nagelkerke R² ≤ %g (needs shrinkage %.4g)", OptimismDelta, s2), N: ceilN(nShrinkage(p, r2cs, s2)), Value: s2},
		{Name: "overall_risk", Doc: fmt.Sprintf("overall outcome proportion within ± %g (95%% confidence)", RiskMargin), N: ceilN(n3), Value: RiskMargin},
	}
	ss := finish("binary", p, shrinkage, crit)
	ss.Events = float64(ss.N) * prevalence
	ss.EPP = ss.Events / float64(p)
	return ss, nil
}

// RileyContinuous computes the four criteria of Riley et al. (Statistics in Medicine
// 2019;38:1262–1275, part I) for a continuous-outcome linear regression model with p
// candidate parameters, anticipated (adjusted) R², and the outcome's mean and SD in the
// target population:
//
//	(i)   shrinkage:   n = p / ((S−1) ln(1 − R²/S)) (for linear regression R²_CS = R²)
//	(ii)  optimism:    n = 1 + p(1 − R²)/δ, δ = 0.05, since apparent − adjusted R² equals
//	                   p(1 − R²_adj)/(n − 1)
//	(iii) residual SD: the smallest n whose 95% interval for σ has multiplicative margin of
//	                   error ≤ 1.1: max(√(χ²₀.₉₇₅,df/df), √(df/χ²₀.₀₂₅,df)) ≤ 1.1, df = n − p − 1
//	(iv)  intercept:   the mean outcome (intercept with centred predictors) within a
//	                   multiplicative margin of error 1.1: t₀.₉₇₅,df·√(σ²/n) ≤ 0.1·|mean|,
//	                   σ² = SD²(1 − R²)
//
// shrinkage 0 means DefaultShrinkage.
func RileyContinuous(p int, r2, mean, sd, shrinkage float64) (*SampleSize, error) {
	if shrinkage == 0 {
		shrinkage = DefaultShrinkage
	}
	switch {
	case p < 1:
		return nil, fmt.Errorf("%w: parameters %d must be at least 1", errBadSampleInput, p)
	case !(r2 > 0 && r2 < 1):
		return nil, fmt.Errorf("%w: R² %g must lie in (0, 1)", errBadSampleInput, r2)
	case !(shrinkage > 0 && shrinkage < 1):
		return nil, fmt.Errorf("%w: shrinkage %g must lie in (0, 1)", errBadSampleInput, shrinkage)
	case r2 >= shrinkage:
		return nil, fmt.Errorf("%w: R² %g must be below the shrinkage %g", errBadSampleInput, r2, shrinkage)
	case !(sd > 0) || math.IsInf(sd, 0):
		return nil, fmt.Errorf("%w: SD %g must be positive", errBadSampleInput, sd)
	case mean == 0 || math.IsNaN(mean) || math.IsInf(mean, 0):
		return nil, fmt.Errorf("%w: mean %g must be a non-zero number (the intercept criterion is relative to it)", errBadSampleInput, mean)
	}
	sigma2 := sd * sd * (1 - r2)
	n4 := smallestN(p+2, func(n int) bool {
		df := float64(n - p - 1)
		t := distuv.StudentsT{Mu: 0, Sigma: 1, Nu: df}.Quantile(0.975)
		return t*math.Sqrt(sigma2/float64(n)) <= (MMOETarget-1)*math.Abs(mean)
	})
	crit := []Criterion{
		{Name: "shrinkage", Doc: fmt.Sprintf("expected uniform shrinkage ≥ %g (little overfitting)", shrinkage), N: ceilN(nShrinkage(p, r2, shrinkage)), Value: shrinkage},
		{Name: "optimism", Doc: fmt.Sprintf("apparent − adjusted R² ≤ %g", OptimismDelta), N: ceilN(1 + float64(p)*(1-r2)/OptimismDelta), Value: OptimismDelta},
		{Name: "residual_sd", Doc: fmt.Sprintf("residual SD within a multiplicative margin of error %g", MMOETarget), N: ResidualSDN(p), Value: MMOETarget},
		{Name: "intercept", Doc: fmt.Sprintf("mean outcome within a multiplicative margin of error %g", MMOETarget), N: n4, Value: MMOETarget},
	}
	ss := finish("continuous", p, shrinkage, crit)
	ss.EPP = float64(ss.N) / float64(p)
	return ss, nil
}

// ResidualSDMMOE is the multiplicative margin of error of the 95% interval for the residual
// SD with df degrees of freedom: max(√(χ²₀.₉₇₅,df/df), √(df/χ²₀.₀₂₅,df)).
func ResidualSDMMOE(df float64) float64 {
	c := distuv.ChiSquared{K: df}
	return math.Max(math.Sqrt(c.Quantile(0.975)/df), math.Sqrt(df/c.Quantile(0.025)))
}

// ResidualSDN is criterion (iii): the smallest n with ResidualSDMMOE(n − p − 1) ≤ 1.1.
func ResidualSDN(p int) int {
	return smallestN(p+2, func(n int) bool { return ResidualSDMMOE(float64(n-p-1)) <= MMOETarget })
}

// smallestN returns the smallest n ≥ lo with ok(n), for ok monotone in n.
func smallestN(lo int, ok func(int) bool) int {
	hi := lo
	for !ok(hi) {
		hi *= 2
		if hi > 1<<40 {
			return hi
		}
	}
	for lo < hi {
		mid := lo + (hi-lo)/2
		if ok(mid) {
			hi = mid
		} else {
			lo = mid + 1
		}
	}
	return lo
}

func ceilN(x float64) int {
	// guard against 662.0000000001 from rounding when the exact value is an integer
	r := math.Round(x)
	if math.Abs(x-r) < 1e-9*math.Max(1, x) {
		return int(r)
	}
	return int(math.Ceil(x))
}

func finish(outcome string, p int, S float64, crit []Criterion) *SampleSize {
	best := 0
	for i, c := range crit {
		if c.N > crit[best].N {
			best = i
		}
	}
	crit[best].Binds = true
	return &SampleSize{Outcome: outcome, Params: p, Criteria: crit, N: crit[best].N, Binding: crit[best].Name, Shrinkage: S, Caution: FormulaCaution}
}

// OLSHoldoutMSE is the expected squared prediction error on new data of ordinary least
// squares with p parameters fitted to n samples, noise variance σ² (Hastie, Tibshirani &
// Friedman, The Elements of Statistical Learning, 2nd ed.): design "fixed" (new responses
// at the training inputs) σ²(1 + p/n); design "random" (Gaussian inputs, new draws)
// σ²(1 + p/(n − p − 1)), +Inf when n ≤ p + 1.
func OLSHoldoutMSE(sigma2 float64, p, n int, design string) (float64, error) {
	if p < 1 || n < 1 || sigma2 < 0 {
		return 0, fmt.Errorf("%w: need σ² ≥ 0, p ≥ 1, n ≥ 1 (got %g, %d, %d)", errBadSampleInput, sigma2, p, n)
	}
	switch design {
	case "fixed":
		return sigma2 * (1 + float64(p)/float64(n)), nil
	case "random":
		if n <= p+1 {
			return inf, nil
		}
		return sigma2 * (1 + float64(p)/float64(n-p-1)), nil
	}
	return 0, fmt.Errorf("%w: design %q is not one of fixed, random", errBadSampleInput, design)
}

// OLSNForRatio is the smallest n at which OLSHoldoutMSE/σ² ≤ ratio (ratio > 1): fixed design
// n ≥ p/(ratio − 1), random design n ≥ p + 1 + p/(ratio − 1).
func OLSNForRatio(p int, ratio float64, design string) (int, error) {
	if !(ratio > 1) || p < 1 {
		return 0, fmt.Errorf("%w: ratio %g must exceed 1 and p %d be at least 1", errBadSampleInput, ratio, p)
	}
	k := float64(p) / (ratio - 1)
	switch design {
	case "fixed":
		return ceilN(k), nil
	case "random":
		return ceilN(float64(p) + 1 + k), nil
	}
	return 0, fmt.Errorf("%w: design %q is not one of fixed, random", errBadSampleInput, design)
}
