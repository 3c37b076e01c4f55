package estimate

import (
	"errors"
	"fmt"
	"math"

	"gonum.org/v1/gonum/mat"
)

// qr is a Householder QR factorisation of an m×n matrix (m ≥ n): the vectors vₖ are kept
// below and on the diagonal of a, R's diagonal in rdiag and its strict upper part in a.
type qr struct {
	m, n  int
	a     [][]float64
	rdiag []float64
	beta  []float64
}

func factorQR(a [][]float64) *qr {
	m, n := len(a), len(a[0])
	f := &qr{m: m, n: n, a: a, rdiag: make([]float64, n), beta: make([]float64, n)}
	for k := 0; k < n; k++ {
		// scaled norm to avoid overflow
		var scale float64
		for i := k; i < m; i++ {
			scale = math.Max(scale, math.Abs(a[i][k]))
		}
		if scale == 0 {
			f.rdiag[k] = 0
			continue
		}
		var ss float64
		for i := k; i < m; i++ {
			t := a[i][k] / scale
			ss += t * t
		}
		norm := scale * math.Sqrt(ss)
		alpha := -norm
		if a[k][k] < 0 {
			alpha = norm
		}
		a[k][k] -= alpha
		var vv float64
		for i := k; i < m; i++ {
			vv += a[i][k] * a[i][k]
		}
		f.rdiag[k] = alpha
		if vv == 0 {
			continue
		}
		f.beta[k] = 2 / vv
		for j := k + 1; j < n; j++ {
			var s float64
			for i := k; i < m; i++ {
				s += a[i][k] * a[i][j]
			}
			s *= f.beta[k]
			for i := k; i < m; i++ {
				a[i][j] -= s * a[i][k]
			}
		}
	}
	return f
}

// qt applies Qᵀ to b in place.
func (f *qr) qt(b []float64) {
	for k := 0; k < f.n; k++ {
		if f.beta[k] == 0 {
			continue
		}
		var s float64
		for i := k; i < f.m; i++ {
			s += f.a[i][k] * b[i]
		}
		s *= f.beta[k]
		for i := k; i < f.m; i++ {
			b[i] -= s * f.a[i][k]
		}
	}
}

// q applies Q to b in place.
func (f *qr) q(b []float64) {
	for k := f.n - 1; k >= 0; k-- {
		if f.beta[k] == 0 {
			continue
		}
		var s float64
		for i := k; i < f.m; i++ {
			s += f.a[i][k] * b[i]
		}
		s *= f.beta[k]
		for i := k; i < f.m; i++ {
			b[i] -= s * f.a[i][k]
		}
	}
}

func (f *qr) r(i, j int) float64 {
	if i == j {
		return f.rdiag[i]
	}
	return f.a[i][j]
}

// fullRank reports whether R's diagonal is well away from zero.
func (f *qr) fullRank() bool {
	var mx float64
	for _, d := range f.rdiag {
		mx = math.Max(mx, math.Abs(d))
	}
	if mx == 0 {
		return false
	}
	for _, d := range f.rdiag {
		if math.Abs(d) <= 1e-14*mx*float64(f.m) {
			return false
		}
	}
	return true
}

// solveR solves R x = b[:n] in place into x.
func (f *qr) solveR(b, x []float64) {
	for i := f.n - 1; i >= 0; i-- {
		s := b[i]
		for j := i + 1; j < f.n; j++ {
			s -= f.a[i][j] * x[j]
		}
		x[i] = s / f.rdiag[i]
	}
}

// solveRT solves Rᵀ h = g into h.
func (f *qr) solveRT(g, h []float64) {
	for i := 0; i < f.n; i++ {
		s := g[i]
		for j := 0; j < i; j++ {
			s -= f.a[j][i] * h[j]
		}
		h[i] = s / f.rdiag[i]
	}
}

// qrSolveInPlace solves min ‖A x − b‖ by Householder QR, destroying A and b. It returns
// false when A is rank deficient.
func qrSolveInPlace(A [][]float64, b, x []float64) bool {
	f := factorQR(A)
	if !f.fullRank() {
		return false
	}
	f.qt(b)
	f.solveR(b, x)
	for _, v := range x {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return false
		}
	}
	return true
}

// qrR returns R of A (destroying A), false when rank deficient.
func qrR(A [][]float64) ([][]float64, bool) {
	f := factorQR(A)
	if !f.fullRank() {
		return nil, false
	}
	R := newMat(f.n, f.n)
	for i := 0; i < f.n; i++ {
		for j := i; j < f.n; j++ {
			R[i][j] = f.r(i, j)
		}
	}
	return R, true
}

// LinearFit is an ordinary least-squares solution.
type LinearFit struct {
	Coef    []float64
	StdErr  []float64 // sqrt(diag(s²(XᵀX)⁻¹)), s² = RSS/(n−p); NaN when n = p
	RSS     float64
	ResidSD float64 // sqrt(RSS/(n−p))
	R2      float64 // 1 − RSS/Σ(y−ȳ)² (centred; uncentred 1 − RSS/Σy² when the design has no constant column)
	// Refinements is the number of refinement sweeps that changed the solution.
	Refinements int
}

// ErrRankDeficient is returned when the design's columns are linearly dependent to working
// precision.
var ErrRankDeficient = errors.New("linear least squares: design is rank deficient")

// LinearLS solves min ‖X β − y‖₂. Method: columns scaled to unit norm, Householder QR, then
// Björck's iterative refinement of the augmented system [I X; Xᵀ 0][r; β] = [y; 0] with the
// residuals of each sweep accumulated in double-double arithmetic (Björck 1967, "Iterative
// refinement of linear least squares solutions I"; Higham, Accuracy and Stability of
// Numerical Algorithms, §20.5). The refinement recovers the digits the condition number
// squared would otherwise cost, which is what NIST's Filip (degree-10 polynomial) needs.
func LinearLS(X *mat.Dense, y []float64) (*LinearFit, error) {
	m, n := X.Dims()
	hi := newMat(m, n)
	for i := 0; i < m; i++ {
		for j := 0; j < n; j++ {
			hi[i][j] = X.At(i, j)
		}
	}
	return linearLS(hi, nil, y)
}

// PolyLS fits y ≈ Σₖ βₖ xᵏ, k = 0..degree, like LinearLS, but with the powers xᵏ carried
// in double-double precision in the refinement, so that rounding the design's entries to
// float64 does not limit the accuracy of an ill-conditioned fit.
func PolyLS(x, y []float64, degree int) (*LinearFit, error) {
	if degree < 0 {
		panic("estimate: polynomial degree must be non-negative")
	}
	m, n := len(x), degree+1
	hi, lo := newMat(m, n), newMat(m, n)
	for i, v := range x {
		ph, pl := 1.0, 0.0
		for k := 0; k < n; k++ {
			hi[i][k], lo[i][k] = ph, pl
			// (ph + pl)·v in double-double
			p, e := twoProd(ph, v)
			e += pl * v
			ph, pl = twoSum(p, e)
		}
	}
	return linearLS(hi, lo, y)
}

// linearLS solves with the design hi + lo (lo nil = 0); see LinearLS.
func linearLS(orig, lo [][]float64, y []float64) (*LinearFit, error) {
	m := len(orig)
	if m == 0 {
		return nil, errors.New("linear least squares: no rows")
	}
	n := len(orig[0])
	if len(y) != m {
		return nil, fmt.Errorf("linear least squares: %d rows but %d responses", m, len(y))
	}
	if m < n || n == 0 {
		return nil, fmt.Errorf("linear least squares: %d rows for %d columns", m, n)
	}
	scale := make([]float64, n)
	for j := 0; j < n; j++ {
		var s float64
		for i := 0; i < m; i++ {
			s = math.Hypot(s, orig[i][j])
		}
		if s == 0 {
			return nil, ErrRankDeficient
		}
		scale[j] = s
	}
	A := newMat(m, n)
	for i := 0; i < m; i++ {
		for j := 0; j < n; j++ {
			A[i][j] = orig[i][j] / scale[j]
		}
	}
	f := factorQR(A)
	if !f.fullRank() {
		return nil, ErrRankDeficient
	}
	// Work in the scaled unknowns z = D β; the residual is y − X β computed from the
	// unscaled design (exact entries) with β = z/D formed in double-double.
	beta := make([]float64, n)
	betaLo := make([]float64, n)
	z := make([]float64, n)
	tmp := append([]float64(nil), y...)
	f.qt(tmp)
	f.solveR(tmp, z)
	setBeta := func() {
		for j := range z {
			beta[j] = z[j] / scale[j]
			betaLo[j] = math.FMA(-beta[j], scale[j], z[j]) / scale[j]
		}
	}
	resid := func(i int, r float64) float64 {
		hi, l := y[i], 0.0
		hi, l = ddAdd(hi, l, -r, 0)
		for j := 0; j < n; j++ {
			// (orig + lo)·(beta + betaLo)
			p, e := twoProd(orig[i][j], beta[j])
			e += orig[i][j] * betaLo[j]
			if lo != nil {
				e += lo[i][j] * beta[j]
			}
			hi, l = ddAdd(hi, l, -p, -e)
		}
		return hi + l
	}
	setBeta()
	rvec := make([]float64, m)
	for i := 0; i < m; i++ {
		rvec[i] = resid(i, 0)
	}
	fv := make([]float64, m)
	gv := make([]float64, n)
	h := make([]float64, n)
	dz := make([]float64, n)
	dr := make([]float64, m)
	refinements := 0
	for sweep := 0; sweep < 20; sweep++ {
		// f = y − r − X β ; g = −(X D⁻¹)ᵀ r, both in double-double
		for i := 0; i < m; i++ {
			fv[i] = resid(i, rvec[i])
		}
		for j := 0; j < n; j++ {
			var hi, l float64
			for i := 0; i < m; i++ {
				p, e := twoProd(orig[i][j], rvec[i])
				if lo != nil {
					e += lo[i][j] * rvec[i]
				}
				hi, l = ddAdd(hi, l, p, e)
			}
			gv[j] = -(hi + l) / scale[j]
		}
		// solve [I A; Aᵀ 0][dr; dz] = [f; g] with A = Q[R; 0]
		f.solveRT(gv, h)
		copy(dr, fv)
		f.qt(dr)
		for j := 0; j < n; j++ {
			dr[j] -= h[j]
		}
		f.solveR(dr, dz)
		copy(dr[:n], h)
		f.q(dr)
		changed := false
		for j := 0; j < n; j++ {
			nz := z[j] + dz[j]
			if nz != z[j] {
				changed = true
			}
			z[j] = nz
		}
		for i := 0; i < m; i++ {
			rvec[i] += dr[i]
		}
		setBeta()
		if !changed {
			break
		}
		refinements++
	}
	fit := &LinearFit{Coef: append([]float64(nil), beta...), StdErr: make([]float64, n), Refinements: refinements}
	var rh, rl float64
	for i := 0; i < m; i++ {
		ri := resid(i, 0)
		p, e := twoProd(ri, ri)
		rh, rl = ddAdd(rh, rl, p, e)
	}
	fit.RSS = rh + rl
	dof := m - n
	hasConst := false
	for j := 0; j < n && !hasConst; j++ {
		c := orig[0][j]
		same := c != 0
		for i := 1; i < m && same; i++ {
			same = orig[i][j] == c
		}
		hasConst = same
	}
	var mean, tss float64
	if hasConst {
		for _, v := range y {
			mean += v
		}
		mean /= float64(m)
	}
	for _, v := range y {
		tss += (v - mean) * (v - mean)
	}
	fit.R2 = 1 - fit.RSS/tss
	for j := range fit.StdErr {
		fit.StdErr[j] = math.NaN()
	}
	if dof > 0 {
		fit.ResidSD = math.Sqrt(fit.RSS / float64(dof))
		s2 := fit.RSS / float64(dof)
		// (XᵀX)⁻¹ = D⁻¹R⁻¹R⁻ᵀD⁻¹: its j-th diagonal entry is ‖row j of R⁻¹‖²/dⱼ²
		for j := 0; j < n; j++ {
			fit.StdErr[j] = math.Sqrt(s2*rowNormSqRinv(f, j)) / scale[j]
		}
	}
	return fit, nil
}

// rowNormSqRinv returns Σₖ (R⁻¹)ⱼₖ², the squared norm of row j of R⁻¹.
func rowNormSqRinv(f *qr, j int) float64 {
	// row j of R⁻¹ is the solution u of uᵀR = eⱼᵀ, i.e. Rᵀu = eⱼ
	n := f.n
	e := make([]float64, n)
	u := make([]float64, n)
	e[j] = 1
	f.solveRT(e, u)
	var s float64
	for _, v := range u {
		s += v * v
	}
	return s
}

func twoSum(a, b float64) (s, e float64) {
	s = a + b
	bb := s - a
	e = (a - (s - bb)) + (b - bb)
	return s, e
}

func twoProd(a, b float64) (p, e float64) {
	p = a * b
	e = math.FMA(a, b, -p)
	return p, e
}

// ddAdd adds the double-double (bh, bl) to (ah, al).
func ddAdd(ah, al, bh, bl float64) (float64, float64) {
	s, e := twoSum(ah, bh)
	e += al + bl
	return twoSum(s, e)
}

// PolyDesign returns the m×(degree+1) design matrix [1, x, x², …, x^degree].
func PolyDesign(x []float64, degree int) *mat.Dense {
	if degree < 0 {
		panic("estimate: polynomial degree must be non-negative")
	}
	d := mat.NewDense(len(x), degree+1, nil)
	for i, v := range x {
		t := 1.0
		for k := 0; k <= degree; k++ {
			d.Set(i, k, t)
			t *= v
		}
	}
	return d
}
