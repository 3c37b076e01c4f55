package estimate

import (
	"errors"
	"fmt"
	"math"
)

// Model is y ≈ F(x; θ) for LeastSquares. Grad, when set, writes ∂F/∂θ at x into g; when nil,
// LeastSquares uses central finite differences.
type Model struct {
	F    func(x float64, p []float64) float64
	Grad func(x float64, p, g []float64)
}

// LSOptions tune LeastSquares. The zero value means the defaults below.
type LSOptions struct {
	Lower, Upper []float64 // bounds per parameter (nil = unbounded); the start is clamped into them
	MaxIter      int       // default 2000 iterations
	XTol         float64   // relative step tolerance, default 1e-14
	FTol         float64   // relative RSS change tolerance, default 1e-16
}

// LSResult is a least-squares fit.
type LSResult struct {
	Params     []float64
	StdErr     []float64 // sqrt(diag(s²(JᵀJ)⁻¹)), s² = RSS/(n−p); NaN when n ≤ p or J is rank deficient
	RSS        float64   // Σ wᵢ(yᵢ − F(xᵢ))²
	Iterations int
	Converged  bool
}

// maxGrowth bounds the relative change of a parameter in one step.
const maxGrowth = 10

// ErrNoConvergence reports that LeastSquares hit MaxIter.
var ErrNoConvergence = errors.New("least squares: no convergence")

// LeastSquares minimises Σ wᵢ(yᵢ − F(xᵢ; θ))² over θ within the bounds (w nil = all 1) by
// Levenberg–Marquardt: each step solves the damped problem min ‖Jδ + r‖² + λ‖Dδ‖² by
// Householder QR (not the normal equations), D² the running maximum of diag(JᵀJ)
// (Moré 1978, "The Levenberg–Marquardt algorithm: implementation and theory"), λ updated by
// the gain ratio (Nielsen 1999), and the step projected onto the bounds. It returns the
// best point found with ErrNoConvergence if MaxIter is reached.
func LeastSquares(m Model, x, y, w, start []float64, o *LSOptions) (*LSResult, error) {
	var opt LSOptions
	if o != nil {
		opt = *o
	}
	if opt.MaxIter == 0 {
		opt.MaxIter = 2000
	}
	if opt.XTol == 0 {
		opt.XTol = 1e-14
	}
	if opt.FTol == 0 {
		opt.FTol = 1e-16
	}
	n, p := len(x), len(start)
	if len(y) != n || (w != nil && len(w) != n) {
		return nil, fmt.Errorf("least squares: x, y and w lengths differ (%d, %d, %d)", n, len(y), len(w))
	}
	if n == 0 || p == 0 {
		return nil, errors.New("least squares: no data or no parameters")
	}
	sw := make([]float64, n)
	for i := range sw {
		sw[i] = 1
		if w != nil {
			if w[i] < 0 || math.IsNaN(w[i]) {
				return nil, fmt.Errorf("least squares: weight %d is %v", i, w[i])
			}
			sw[i] = math.Sqrt(w[i])
		}
	}
	lower := func(j int) float64 {
		if opt.Lower == nil {
			return -inf
		}
		return opt.Lower[j]
	}
	upper := func(j int) float64 {
		if opt.Upper == nil {
			return inf
		}
		return opt.Upper[j]
	}
	clamp := func(q []float64) {
		for j := range q {
			q[j] = math.Min(math.Max(q[j], lower(j)), upper(j))
		}
	}
	theta := append([]float64(nil), start...)
	clamp(theta)

	resid := func(q, r []float64) float64 {
		var s float64
		for i := range x {
			r[i] = sw[i] * (m.F(x[i], q) - y[i])
			s += r[i] * r[i]
		}
		if math.IsNaN(s) {
			return inf
		}
		return s
	}
	g := make([]float64, p)
	qtmp := make([]float64, p)
	jac := func(q []float64, J [][]float64) {
		for i := range x {
			if m.Grad != nil {
				m.Grad(x[i], q, g)
			} else {
				for j := range q {
					h := 1e-6 * math.Max(math.Abs(q[j]), 1e-6)
					copy(qtmp, q)
					qtmp[j] = q[j] + h
					fp := m.F(x[i], qtmp)
					qtmp[j] = q[j] - h
					fm := m.F(x[i], qtmp)
					g[j] = (fp - fm) / (2 * h)
				}
			}
			for j := range q {
				J[i][j] = sw[i] * g[j]
			}
		}
	}
	r := make([]float64, n)
	rNew := make([]float64, n)
	J := newMat(n, p)
	A := newMat(n+p, p)
	b := make([]float64, n+p)
	diag := make([]float64, p)
	cand := make([]float64, p)
	delta := make([]float64, p)

	f := resid(theta, r)
	if math.IsInf(f, 1) {
		return nil, errors.New("least squares: model is not finite at the start")
	}
	jac(theta, J)
	lambda := -1.0
	nu := 2.0
	res := &LSResult{}
	converged := false
	it := 0
	for ; it < opt.MaxIter && !converged; it++ {
		maxJTJ := 0.0
		for j := 0; j < p; j++ {
			var s float64
			for i := 0; i < n; i++ {
				s += J[i][j] * J[i][j]
			}
			diag[j] = math.Max(diag[j], s)
			maxJTJ = math.Max(maxJTJ, diag[j])
		}
		if lambda < 0 {
			lambda = 1e-3
		}
		// inner loop: shrink the trust region until a step reduces the RSS
		for {
			for i := 0; i < n; i++ {
				copy(A[i], J[i])
				b[i] = -r[i]
			}
			for j := 0; j < p; j++ {
				for k := range A[n+j] {
					A[n+j][k] = 0
				}
				d := diag[j]
				if d == 0 {
					d = 1e-12 * math.Max(maxJTJ, 1)
				}
				A[n+j][j] = math.Sqrt(lambda * d)
				b[n+j] = 0
			}
			if !qrSolveInPlace(A, b, delta) {
				lambda *= nu
				nu *= 2
				if lambda > 1e30 {
					converged = true
					break
				}
				continue
			}
			// A step that multiplies a parameter's magnitude by more than maxGrowth is
			// treated as a failed step (λ grows): it keeps the first steps from a poor start
			// out of flat far-away plateaus (BoxBOD from NIST start 1).
			tooFar := false
			for j := range cand {
				cand[j] = theta[j] + delta[j]
				if math.Abs(delta[j]) > maxGrowth*math.Max(math.Abs(theta[j]), 1e-8) {
					tooFar = true
				}
			}
			if tooFar {
				lambda *= nu
				nu *= 2
				if lambda > 1e30 {
					converged = true
					break
				}
				continue
			}
			clamp(cand)
			fNew := resid(cand, rNew)
			// predicted reduction of the linear model for the (projected) step
			var pred, stepNorm, thNorm float64
			for j := range cand {
				delta[j] = cand[j] - theta[j]
				stepNorm += delta[j] * delta[j] * diag[j]
				thNorm += theta[j] * theta[j] * diag[j]
			}
			for i := 0; i < n; i++ {
				var s float64
				for j := 0; j < p; j++ {
					s += J[i][j] * delta[j]
				}
				pred += -(2*r[i]*s + s*s)
			}
			if fNew < f {
				rho := (f - fNew) / math.Max(pred, 1e-300)
				relF := (f - fNew) / math.Max(f, 1e-300)
				copy(theta, cand)
				copy(r, rNew)
				f = fNew
				jac(theta, J)
				lambda *= math.Max(1.0/3, 1-math.Pow(2*rho-1, 3))
				nu = 2
				if math.Sqrt(stepNorm) <= opt.XTol*(math.Sqrt(thNorm)+opt.XTol) || relF <= opt.FTol || f == 0 {
					converged = true
				}
				break
			}
			if math.Sqrt(stepNorm) <= opt.XTol*(math.Sqrt(thNorm)+opt.XTol) || f == 0 {
				converged = true
				break
			}
			lambda *= nu
			nu *= 2
			if lambda > 1e30 {
				converged = true
				break
			}
		}
	}
	res.Params = theta
	res.RSS = f
	res.Iterations = it
	res.Converged = converged
	res.StdErr = stdErrors(J, f, n, p)
	if !converged {
		return res, ErrNoConvergence
	}
	return res, nil
}

// stdErrors returns sqrt(diag(s²(JᵀJ)⁻¹)) through the R factor of J: (JᵀJ)⁻¹ = R⁻¹R⁻ᵀ.
func stdErrors(J [][]float64, rss float64, n, p int) []float64 {
	se := make([]float64, p)
	for j := range se {
		se[j] = math.NaN()
	}
	if n <= p {
		return se
	}
	A := newMat(n, p)
	for i := range J {
		copy(A[i], J[i])
	}
	R, ok := qrR(A)
	if !ok {
		return se
	}
	// Rinv upper triangular
	Rinv := newMat(p, p)
	for j := p - 1; j >= 0; j-- {
		Rinv[j][j] = 1 / R[j][j]
		for i := j - 1; i >= 0; i-- {
			var s float64
			for k := i + 1; k <= j; k++ {
				s += R[i][k] * Rinv[k][j]
			}
			Rinv[i][j] = -s / R[i][i]
		}
	}
	s2 := rss / float64(n-p)
	for i := 0; i < p; i++ {
		var v float64
		for k := i; k < p; k++ {
			v += Rinv[i][k] * Rinv[i][k]
		}
		se[i] = math.Sqrt(s2 * v)
	}
	return se
}

func newMat(r, c int) [][]float64 {
	data := make([]float64, r*c)
	m := make([][]float64, r)
	for i := range m {
		m[i] = data[i*c : (i+1)*c : (i+1)*c]
	}
	return m
}
