package estimate

// Built-in models with a capacity knob, used to measure learning curves:
//
//   - ridge: polynomial ridge regression; capacity = total polynomial degree over all features,
//     interaction terms included. Features are standardised (training-side mean and standard
//     deviation) BEFORE the expansion, so the monomials stay of order one; the normal equations
//     are solved by Cholesky with a small ridge term, and a system whose Cholesky condition
//     estimate exceeds CondLimit is re-solved by Householder QR on the expanded rows.
//   - logistic: logistic regression on the same polynomial features for a 0/1 label;
//     capacity = degree; L2 penalty 0.5·λ·‖w‖² on every coefficient but the intercept (the
//     objective scikit-learn's LogisticRegression minimises with C = 1/λ), fitted by iteratively
//     reweighted least squares (Newton's method) with step halving.
//   - knn: k-nearest neighbours (Euclidean distance on standardised features) for regression
//     (mean of the neighbours' labels) or classification (fraction of neighbours labelled 1);
//     capacity = 1/k. A k-d tree finds the neighbours: about O(n log n) to build and
//     O(log n) per query for a few features, degrading towards brute force (O(n) per query)
//     as the number of features grows past ten or so.

import (
	"errors"
	"fmt"
	"math"
	"sort"

	"gonum.org/v1/gonum/mat"
)

// Data is a feature matrix with its label: row i is X[i*P : (i+1)*P], label Y[i].
// Groups, when set, marks 0/1 columns: Groups[j] ≥ 0 puts column j in an indicator group (each
// 0/1 feature its own group, the one-hot columns of one categorical feature one group), and
// the polynomial expansion then omits a group's powers and within-group products, which are
// identically linear in its terms (x² = x for 0/1; one-hot columns multiply to zero).
// Groups[j] == LinearOnly keeps column j out of every product and power: it enters the model
// as a main effect only (missing-value indicators, whose few rows could not support
// interactions).
type Data struct {
	X      []float64
	Y      []float64
	N, P   int
	Groups []int
	Rows   []int64 // optional: the table's ss_row of each row, for messages
}

// where names row i for a message: "ss_row 17" when Rows is set, else "row 18".
func (d Data) where(i int) string {
	if i < len(d.Rows) {
		return fmt.Sprintf("ss_row %d", d.Rows[i])
	}
	return fmt.Sprintf("row %d", i+1)
}

// LinearOnly marks a column of Data.Groups that enters the polynomial as a main effect only.
const LinearOnly = -2

// Row returns row i of the feature matrix.
func (d Data) Row(i int) []float64 { return d.X[i*d.P : (i+1)*d.P] }

// check reports a malformed Data (programmer error or non-finite values).
func (d Data) check(what string) error {
	if d.N <= 0 {
		return fmt.Errorf("%s: no rows", what)
	}
	if len(d.X) != d.N*d.P || len(d.Y) != d.N {
		return fmt.Errorf("%s: %d rows × %d features do not match %d values and %d labels", what, d.N, d.P, len(d.X), len(d.Y))
	}
	for i, v := range d.X {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return fmt.Errorf("%s: row %d feature %d is %v", what, i/d.P+1, i%d.P+1, v)
		}
	}
	for i, v := range d.Y {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return fmt.Errorf("%s: row %d label is %v", what, i+1, v)
		}
	}
	return nil
}

// CondLimit is the Cholesky condition-number estimate above which a normal-equations solve is
// redone by QR on the rows: Cholesky's relative error grows like cond·ε (ε ≈ 2.2e-16), so
// 1e8 keeps about eight significant digits (a numerical-analysis bound; Golub & Van Loan,
// Matrix Computations, §5.3, section from memory).
const CondLimit = 1e8

// DefaultRidge is the ridge penalty per training row on the standardised, expanded
// coefficients (the intercept is never penalised) when Options leave it zero: small enough to
// leave well-posed fits unchanged in their leading digits, large enough to keep a nearly
// collinear high-degree system solvable (common practice, no source).
const DefaultRidge = 1e-8

// scaler standardises features with the training side's mean and standard deviation; a
// constant feature keeps scale 1 (it becomes a column of zeros after centring).
type scaler struct{ mean, sd []float64 }

func newScaler(d Data) scaler {
	s := scaler{mean: make([]float64, d.P), sd: make([]float64, d.P)}
	for j := 0; j < d.P; j++ {
		var m, m2 float64 // Welford
		for i := 0; i < d.N; i++ {
			x := d.X[i*d.P+j]
			delta := x - m
			m += delta / float64(i+1)
			m2 += delta * (x - m)
		}
		s.mean[j] = m
		sd := math.Sqrt(m2 / float64(d.N))
		if sd == 0 || math.IsNaN(sd) {
			sd = 1
		}
		s.sd[j] = sd
	}
	return s
}

func (s scaler) apply(x, out []float64) {
	for j := range x {
		out[j] = (x[j] - s.mean[j]) / s.sd[j]
	}
}

// polyBasis enumerates the monomials of total degree ≤ Deg in P variables in graded order
// (degree 0, then 1, ...), so the terms of every lower degree are a prefix: a lower degree's
// normal equations are the leading block of a higher degree's. Each term is its parent term
// times one variable, so expanding a row costs one multiplication per term.
type polyBasis struct {
	P, Deg int
	parent []int // term index of the parent (term 0, the constant, has none)
	vari   []int // variable multiplied in
	upto   []int // upto[d] = number of terms of degree ≤ d
}

// MaxTerms bounds the number of polynomial terms a model may have (memory and time grow with
// its square).
const MaxTerms = 2000

func newPolyBasis(p, deg int, groups []int) (*polyBasis, error) {
	if deg < 0 {
		return nil, fmt.Errorf("polynomial degree %d: must be at least 0", deg)
	}
	b := &polyBasis{P: p, Deg: deg, parent: []int{-1}, vari: []int{-1}, upto: []int{1}}
	last := []int{0} // smallest variable a child of each term may multiply in
	start := 0
	for d := 1; d <= deg; d++ {
		end := len(b.parent)
		for t := start; t < end; t++ {
			for j := last[t]; j < p; j++ {
				if groups != nil && groups[j] >= 0 && b.hasGroup(t, groups, groups[j]) {
					continue
				}
				if groups != nil && t > 0 && (groups[j] == LinearOnly || b.hasGroup(t, groups, LinearOnly)) {
					continue
				}
				if len(b.parent) >= MaxTerms {
					return nil, fmt.Errorf("polynomial degree %d over %d features: more than %d terms", deg, p, MaxTerms)
				}
				b.parent = append(b.parent, t)
				b.vari = append(b.vari, j)
				last = append(last, j)
			}
		}
		start = end
		b.upto = append(b.upto, len(b.parent))
	}
	return b, nil
}

// hasGroup reports whether term t already multiplies in a variable of indicator group g.
func (b *polyBasis) hasGroup(t int, groups []int, g int) bool {
	for ; t > 0; t = b.parent[t] {
		if groups[b.vari[t]] == g {
			return true
		}
	}
	return false
}

// Terms is the number of terms up to degree d.
func (b *polyBasis) Terms(d int) int { return b.upto[d] }

// expand writes the terms of standardised row z into out (len ≥ Terms(Deg)).
func (b *polyBasis) expand(z, out []float64) {
	out[0] = 1
	for t := 1; t < len(b.parent); t++ {
		out[t] = out[b.parent[t]] * z[b.vari[t]]
	}
}

// ErrIllConditioned is returned when even the QR fallback finds the system singular.
var ErrIllConditioned = errors.New("estimate: least-squares system is singular to working precision")

// ridgeSolve solves (G + λ·n·D) β = c, D = diag(0, 1, ..., 1), by Cholesky. It reports ok =
// false when the factorisation fails or its condition estimate exceeds CondLimit, so that the
// caller re-solves by QR.
func ridgeSolve(g []float64, c []float64, m int, lambdaN float64) (beta []float64, cond float64, ok bool) {
	sym := mat.NewSymDense(m, nil)
	for i := 0; i < m; i++ {
		for j := i; j < m; j++ {
			v := g[i*m+j]
			if i == j && i > 0 {
				v += lambdaN
			}
			sym.SetSym(i, j, v)
		}
	}
	var ch mat.Cholesky
	if !ch.Factorize(sym) {
		return nil, math.Inf(1), false
	}
	cond = ch.Cond()
	if !(cond <= CondLimit) {
		return nil, cond, false
	}
	var x mat.VecDense
	if err := ch.SolveVecTo(&x, mat.NewVecDense(m, append([]float64(nil), c...))); err != nil {
		return nil, cond, false
	}
	beta = make([]float64, m)
	for i := range beta {
		beta[i] = x.AtVec(i)
	}
	return beta, cond, true
}

// qrSolve solves min ‖Aβ − y‖² + λ·n·‖β[1:]‖² by Householder QR of A stacked on the ridge rows
// √(λ·n)·I (intercept row omitted). rows(i, dst) writes expanded row i's first m terms.
func qrSolve(n, m int, rows func(i int, dst []float64), y func(i int) float64, lambdaN float64) ([]float64, error) {
	extra := 0
	if lambdaN > 0 {
		extra = m - 1
	}
	a := mat.NewDense(n+extra, m, nil)
	b := mat.NewDense(n+extra, 1, nil)
	for i := 0; i < n; i++ {
		rows(i, a.RawRowView(i))
		b.Set(i, 0, y(i))
	}
	if extra > 0 {
		s := math.Sqrt(lambdaN)
		for j := 1; j < m; j++ {
			a.Set(n+j-1, j, s)
		}
	}
	if n+extra < m {
		return nil, fmt.Errorf("%d rows for %d coefficients: %w", n, m, ErrIllConditioned)
	}
	var qr mat.QR
	qr.Factorize(a)
	var x mat.Dense
	if err := qr.SolveTo(&x, false, b); err != nil {
		return nil, fmt.Errorf("qr: %v: %w", err, ErrIllConditioned)
	}
	beta := make([]float64, m)
	for i := range beta {
		beta[i] = x.At(i, 0)
	}
	return beta, nil
}

// PolyRidge is a fitted polynomial ridge regression.
type PolyRidge struct {
	Degree int
	Coef   []float64 // on the standardised, expanded terms (graded order; Coef[0] is the intercept)
	Cond   float64   // Cholesky condition estimate of the penalised normal equations
	UsedQR bool      // the Cholesky solve was refused (ill-conditioned) and QR solved it
	sc     scaler
	basis  *polyBasis
}

// FitPolyRidge fits a polynomial ridge regression of total degree deg. ridge is the penalty
// per row (0 → DefaultRidge, negative → none).
func FitPolyRidge(d Data, deg int, ridge float64) (*PolyRidge, error) {
	if err := d.check("ridge"); err != nil {
		return nil, err
	}
	return fitPolyRidgeScaled(d, deg, ridge, newScaler(d))
}

// fitPolyRidgeScaled is FitPolyRidge with a given standardisation.
func fitPolyRidgeScaled(d Data, deg int, ridge float64, sc scaler) (*PolyRidge, error) {
	basis, err := newPolyBasis(d.P, deg, d.Groups)
	if err != nil {
		return nil, err
	}
	m := basis.Terms(deg)
	lambdaN := ridgeLambda(ridge) * float64(d.N)
	z := make([]float64, d.P)
	t := make([]float64, m)
	g := make([]float64, m*m)
	c := make([]float64, m)
	for i := 0; i < d.N; i++ {
		sc.apply(d.Row(i), z)
		basis.expand(z, t)
		accumulate(g, c, t, d.Y[i], m)
	}
	mirror(g, m)
	pr := &PolyRidge{Degree: deg, sc: sc, basis: basis}
	beta, cond, ok := ridgeSolve(g, c, m, lambdaN)
	pr.Cond = cond
	if !ok {
		pr.UsedQR = true
		beta, err = qrSolve(d.N, m, func(i int, dst []float64) {
			zz := make([]float64, d.P)
			sc.apply(d.Row(i), zz)
			basis.expand(zz, dst)
		}, func(i int) float64 { return d.Y[i] }, lambdaN)
		if err != nil {
			return nil, fmt.Errorf("ridge degree %d: %w", deg, err)
		}
	}
	pr.Coef = beta
	return pr, nil
}

func ridgeLambda(r float64) float64 {
	switch {
	case r == 0:
		return DefaultRidge
	case r < 0:
		return 0
	}
	return r
}

// accumulate adds t·tᵀ to the upper triangle of g and t·y to c.
func accumulate(g, c, t []float64, y float64, m int) {
	for i := 0; i < m; i++ {
		ti := t[i]
		if ti == 0 {
			continue
		}
		row := g[i*m:]
		for j := i; j < m; j++ {
			row[j] += ti * t[j]
		}
		c[i] += ti * y
	}
}

// mirror copies the upper triangle of g into the lower.
func mirror(g []float64, m int) {
	for i := 0; i < m; i++ {
		for j := i + 1; j < m; j++ {
			g[j*m+i] = g[i*m+j]
		}
	}
}

// Predict returns the model's prediction for one raw feature row.
func (pr *PolyRidge) Predict(x []float64) float64 {
	z := make([]float64, len(x))
	pr.sc.apply(x, z)
	t := make([]float64, len(pr.Coef))
	pr.basis.expand(z, t)
	return dot(pr.Coef, t)
}

func dot(a, b []float64) float64 {
	var s float64
	for i := range a {
		s += a[i] * b[i]
	}
	return s
}

// Logistic is a fitted logistic regression on polynomial features.
type Logistic struct {
	Degree int
	Coef   []float64 // standardised, expanded terms; Coef[0] is the intercept
	Iter   int       // Newton iterations used
	sc     scaler
	basis  *polyBasis
}

// DefaultL2 is the logistic penalty λ when Options leave it zero: 1, the objective of
// scikit-learn's LogisticRegression with its default C = 1 (sklearn documentation, "C: inverse
// of regularization strength", default 1.0).
const DefaultL2 = 1.0

// FitLogistic fits logistic regression of degree deg to a 0/1 label with penalty l2
// (0 → DefaultL2, negative → none).
func FitLogistic(d Data, deg int, l2 float64) (*Logistic, error) {
	if err := d.check("logistic"); err != nil {
		return nil, err
	}
	if err := checkBinary(d); err != nil {
		return nil, err
	}
	basis, err := newPolyBasis(d.P, deg, d.Groups)
	if err != nil {
		return nil, err
	}
	sc := newScaler(d)
	m := basis.Terms(deg)
	a := make([]float64, d.N*m)
	z := make([]float64, d.P)
	for i := 0; i < d.N; i++ {
		sc.apply(d.Row(i), z)
		basis.expand(z, a[i*m:(i+1)*m])
	}
	beta, it, err := IRLS(a, d.Y, d.N, m, l2Lambda(l2))
	if err != nil {
		return nil, fmt.Errorf("logistic degree %d: %w", deg, err)
	}
	return &Logistic{Degree: deg, Coef: beta, Iter: it, sc: sc, basis: basis}, nil
}

func l2Lambda(v float64) float64 {
	switch {
	case v == 0:
		return DefaultL2
	case v < 0:
		return 0
	}
	return v
}

func checkBinary(d Data) error {
	y := d.Y
	if len(y) > 0 && constant(y) {
		return fmt.Errorf("label is constant (%v): a classifier needs both classes 0 and 1", y[0])
	}
	var n1 int
	for i, v := range y {
		if v != 0 && v != 1 {
			return fmt.Errorf("%s: label %v is not 0 or 1", d.where(i), v)
		}
		if v == 1 {
			n1++
		}
	}
	if n1 == 0 || n1 == len(y) {
		return fmt.Errorf("label is constant (%d of %d rows are 1): a classifier needs both classes", n1, len(y))
	}
	return nil
}

// Prob returns P(label = 1) for one raw feature row.
func (l *Logistic) Prob(x []float64) float64 {
	z := make([]float64, len(x))
	l.sc.apply(x, z)
	t := make([]float64, len(l.Coef))
	l.basis.expand(z, t)
	return sigmoid(dot(l.Coef, t))
}

func sigmoid(u float64) float64 {
	if u >= 0 {
		return 1 / (1 + math.Exp(-u))
	}
	e := math.Exp(u)
	return e / (1 + e)
}

// log1pexp returns log(1 + e^u) without overflow.
func log1pexp(u float64) float64 {
	if u > 0 {
		return u + math.Log1p(math.Exp(-u))
	}
	return math.Log1p(math.Exp(u))
}

// IRLS minimises Σ_i [log(1+e^{a_i·β}) − y_i a_i·β] + 0.5·λ·Σ_{j≥1} β_j² (column 0 of the
// n×m row-major matrix a is the unpenalised intercept) by Newton's method — iteratively
// reweighted least squares (McCullagh & Nelder, Generalized Linear Models, §4.4, from memory) — with step
// halving whenever a step fails to lower the objective. It stops when the largest coefficient
// change is below 1e-10·(1 + ‖β‖∞), within 200 iterations.
func IRLS(a, y []float64, n, m int, lambda float64) ([]float64, int, error) {
	beta := make([]float64, m)
	obj := func(b []float64) float64 {
		var s float64
		for i := 0; i < n; i++ {
			u := dot(a[i*m:(i+1)*m], b)
			s += log1pexp(u) - y[i]*u
		}
		for j := 1; j < m; j++ {
			s += 0.5 * lambda * b[j] * b[j]
		}
		return s
	}
	f := obj(beta)
	h := make([]float64, m*m)
	g := make([]float64, m)
	trial := make([]float64, m)
	for it := 1; it <= 200; it++ {
		for i := range h {
			h[i] = 0
		}
		for j := range g {
			g[j] = 0
		}
		for i := 0; i < n; i++ {
			row := a[i*m : (i+1)*m]
			p := sigmoid(dot(row, beta))
			w := p * (1 - p)
			r := p - y[i]
			for j := 0; j < m; j++ {
				if row[j] == 0 {
					continue
				}
				g[j] += r * row[j]
				wj := w * row[j]
				hr := h[j*m:]
				for k := j; k < m; k++ {
					hr[k] += wj * row[k]
				}
			}
		}
		for j := 1; j < m; j++ {
			g[j] += lambda * beta[j]
			h[j*m+j] += lambda
		}
		// A tiny floor on the diagonal keeps separable, unpenalised fits factorable.
		for j := 0; j < m; j++ {
			h[j*m+j] += 1e-12 * float64(n)
		}
		sym := mat.NewSymDense(m, nil)
		for j := 0; j < m; j++ {
			for k := j; k < m; k++ {
				sym.SetSym(j, k, h[j*m+k])
			}
		}
		var ch mat.Cholesky
		var step mat.VecDense
		if ch.Factorize(sym) {
			if err := ch.SolveVecTo(&step, mat.NewVecDense(m, append([]float64(nil), g...))); err != nil {
				return nil, it, fmt.Errorf("newton step: %w", ErrIllConditioned)
			}
		} else {
			return nil, it, fmt.Errorf("newton step: hessian not positive definite: %w", ErrIllConditioned)
		}
		t := 1.0
		var fNew float64
		for half := 0; half < 50; half++ {
			for j := 0; j < m; j++ {
				trial[j] = beta[j] - t*step.AtVec(j)
			}
			fNew = obj(trial)
			if fNew <= f || math.Abs(fNew-f) <= 1e-14*math.Abs(f) {
				break
			}
			t /= 2
		}
		var maxd, maxb float64
		for j := 0; j < m; j++ {
			maxd = math.Max(maxd, math.Abs(trial[j]-beta[j]))
			maxb = math.Max(maxb, math.Abs(trial[j]))
		}
		copy(beta, trial)
		f = fNew
		if maxd <= 1e-10*(1+maxb) {
			return beta, it, nil
		}
	}
	return beta, 200, nil
}

// kdTree is a k-d tree over standardised points (Bentley 1975), split on the widest
// coordinate at the median; leaves hold up to 16 points.
type kdTree struct {
	p     int
	pts   []float64 // reordered copies of the points, row-major
	idx   []int     // original index of each stored point
	nodes []kdNode
}

type kdNode struct {
	lo, hi      int // points [lo, hi)
	dim         int // split dimension; -1 for a leaf
	split       float64
	left, right int
}

func newKDTree(pts []float64, n, p int) *kdTree {
	t := &kdTree{p: p, pts: make([]float64, len(pts)), idx: make([]int, n)}
	copy(t.pts, pts)
	for i := range t.idx {
		t.idx[i] = i
	}
	t.build(0, n)
	return t
}

func (t *kdTree) swap(i, j int) {
	t.idx[i], t.idx[j] = t.idx[j], t.idx[i]
	a, b := t.pts[i*t.p:(i+1)*t.p], t.pts[j*t.p:(j+1)*t.p]
	for k := range a {
		a[k], b[k] = b[k], a[k]
	}
}

func (t *kdTree) build(lo, hi int) int {
	id := len(t.nodes)
	t.nodes = append(t.nodes, kdNode{lo: lo, hi: hi, dim: -1})
	if hi-lo <= 16 {
		return id
	}
	dim, width := 0, -1.0
	for k := 0; k < t.p; k++ {
		mn, mx := math.Inf(1), math.Inf(-1)
		for i := lo; i < hi; i++ {
			v := t.pts[i*t.p+k]
			mn, mx = math.Min(mn, v), math.Max(mx, v)
		}
		if mx-mn > width {
			dim, width = k, mx-mn
		}
	}
	if width <= 0 {
		return id // all points equal
	}
	mid := (lo + hi) / 2
	t.selectNth(lo, hi, mid, dim)
	split := t.pts[mid*t.p+dim]
	l := t.build(lo, mid)
	r := t.build(mid, hi)
	t.nodes[id].dim, t.nodes[id].split, t.nodes[id].left, t.nodes[id].right = dim, split, l, r
	return id
}

// selectNth partially orders [lo, hi) so that position k holds the k-th smallest coordinate
// dim, smaller ones before it and larger after (Hoare's quickselect).
func (t *kdTree) selectNth(lo, hi, k, dim int) {
	hi--
	for lo < hi {
		pivot := t.pts[((lo+hi)/2)*t.p+dim]
		i, j := lo, hi
		for i <= j {
			for t.pts[i*t.p+dim] < pivot {
				i++
			}
			for t.pts[j*t.p+dim] > pivot {
				j--
			}
			if i <= j {
				t.swap(i, j)
				i++
				j--
			}
		}
		if k <= j {
			hi = j
		} else if k >= i {
			lo = i
		} else {
			return
		}
	}
}

// neighbour is one candidate: squared distance and original index.
type neighbour struct {
	d2  float64
	idx int
}

// knn returns the k nearest stored points to q, nearest first; ties in distance are broken by
// the smaller original index, so results are deterministic.
func (t *kdTree) knn(q []float64, k int, heap []neighbour) []neighbour {
	heap = heap[:0]
	less := func(a, b neighbour) bool { // a farther than b (max-heap order)
		if a.d2 != b.d2 {
			return a.d2 > b.d2
		}
		return a.idx > b.idx
	}
	push := func(x neighbour) {
		if len(heap) < k {
			heap = append(heap, x)
			i := len(heap) - 1
			for i > 0 {
				p := (i - 1) / 2
				if !less(heap[i], heap[p]) {
					break
				}
				heap[i], heap[p] = heap[p], heap[i]
				i = p
			}
			return
		}
		if !less(heap[0], x) {
			return
		}
		heap[0] = x
		i := 0
		for {
			l, r, m := 2*i+1, 2*i+2, i
			if l < len(heap) && less(heap[l], heap[m]) {
				m = l
			}
			if r < len(heap) && less(heap[r], heap[m]) {
				m = r
			}
			if m == i {
				break
			}
			heap[i], heap[m] = heap[m], heap[i]
			i = m
		}
	}
	var visit func(id int)
	visit = func(id int) {
		nd := &t.nodes[id]
		if nd.dim < 0 {
			for i := nd.lo; i < nd.hi; i++ {
				row := t.pts[i*t.p : (i+1)*t.p]
				var d2 float64
				for j, v := range row {
					e := v - q[j]
					d2 += e * e
				}
				push(neighbour{d2, t.idx[i]})
			}
			return
		}
		diff := q[nd.dim] - nd.split
		near, far := nd.left, nd.right
		if diff >= 0 {
			near, far = nd.right, nd.left
		}
		visit(near)
		if len(heap) < k || diff*diff <= heap[0].d2 {
			visit(far)
		}
	}
	visit(0)
	sort.Slice(heap, func(i, j int) bool { return less(heap[j], heap[i]) })
	return heap
}
