package estimate

// The ridge capacity sweep in one pass over the data. Two facts make it cheap:
//
//  1. The training subsets are nested (the first n rows of one seeded permutation), so the
//     normal equations XᵀX, Xᵀy accumulate from one size to the next: each row is added once
//     per repeat, not once per size.
//  2. The polynomial terms are in graded order, so the design of every lower degree is a prefix
//     of the highest degree's columns, and its normal equations are the leading block of the
//     highest degree's Gram matrix.
//
// So one accumulation per repeat (a rank-k update, BLAS dsyrk, over blocks of expanded rows)
// serves every (size, degree). Each (repeat, size, degree) system is then solved by Cholesky
// with the ridge term; when the factorisation fails or its condition estimate exceeds
// CondLimit, that system is re-solved by Householder QR, again in one pass per repeat (phase 3
// below). The accumulations (one per repeat) and then the solves run on all cores.

import (
	"context"
	"fmt"
	"math"

	"gonum.org/v1/gonum/blas"
	"gonum.org/v1/gonum/blas/blas64"
	"gonum.org/v1/gonum/mat"
)

// maxExpanded bounds the expanded training matrix kept in memory (float64s); above it rows are
// expanded again where needed.
const maxExpanded = 16 << 20

// maxSweepMB bounds the memory of the sweep's Gram snapshots (repeats × sizes × terms² floats).
const maxSweepMB = 1024

// SweepStats reports how a sweep's systems were solved.
type SweepStats struct {
	Systems  int // (repeat, size, degree) systems solved
	QRSolves int // of them, re-solved by QR because Cholesky was refused
}

func sweepRidge(ctx context.Context, train, holdout Data, degs []int, o CurveOptions) ([]CurvePoint, error) {
	pts, _, err := sweepRidgeStats(ctx, train, holdout, degs, o, nil)
	return pts, err
}

// sweepRidgeStats is the sweep; keep, when set, sees every solved system's coefficients (on
// the standardised, expanded terms) and whether QR solved it.
func sweepRidgeStats(ctx context.Context, train, holdout Data, degs []int, o CurveOptions, keep func(r, size, deg int, beta []float64, usedQR bool)) ([]CurvePoint, SweepStats, error) {
	var stats SweepStats
	maxDeg := degs[len(degs)-1]
	basis, err := newPolyBasis(train.P, maxDeg, train.Groups)
	if err != nil {
		return nil, stats, err
	}
	m := basis.Terms(maxDeg)
	if mb := float64((o.Repeats*len(o.Sizes)*m+holdout.N)*m*8) / (1 << 20); mb > maxSweepMB {
		return nil, stats, inputf("degree %d over %d features has %d terms: the sweep's %d × %d normal-equation snapshots and expanded holdout rows would take %.0f MB (limit %d); lower the capacity, the repeats or the number of sizes",
			maxDeg, train.P, m, o.Repeats, len(o.Sizes), mb, maxSweepMB)
	}
	sc := newScaler(train)
	zt := standardised(train, sc)
	p := train.P
	var trainX []float64 // expanded training rows, when they fit
	if train.N*m <= maxExpanded {
		trainX = expandAll(zt, train.N, p, basis, m)
	}
	// row writes expanded training row src (first mm terms) into dst; buf is scratch of len m.
	row := func(src int, dst, buf []float64) {
		if trainX != nil {
			copy(dst, trainX[src*m:src*m+len(dst)])
			return
		}
		basis.expand(zt[src*p:(src+1)*p], buf)
		copy(dst, buf[:len(dst)])
	}
	holdX := expandAll(standardised(holdout, sc), holdout.N, p, basis, m)
	lambda := ridgeLambda(o.Ridge)
	perms := make([][]int, o.Repeats)
	for r := range perms {
		perms[r] = permutation(o.Seed, r, train.N)
	}
	nk := len(o.Sizes)
	// Phase 1: per repeat, accumulate G = XᵀX (upper triangle) and c = Xᵀy, snapshotting both
	// at every size.
	grams := make([][][]float64, o.Repeats)
	rhs := make([][][]float64, o.Repeats)
	total := int64(o.Repeats + o.Repeats*nk*len(degs))
	var doneBase int64
	prog := func(done, _ int64) {
		if o.Progress != nil {
			o.Progress(doneBase+done, total)
		}
	}
	const block = 512
	err = parallel(ctx, o.Repeats, prog, func(r int) error {
		g := blas64.Symmetric{N: m, Stride: m, Uplo: blas.Upper, Data: make([]float64, m*m)}
		c := make([]float64, m)
		a := make([]float64, block*m)
		yb := make([]float64, block)
		buf := make([]float64, m)
		perm := perms[r]
		grams[r] = make([][]float64, nk)
		rhs[r] = make([][]float64, nk)
		start := 0
		for k, n := range o.Sizes {
			for start < n {
				if err := ctx.Err(); err != nil {
					return err
				}
				end := min(start+block, n)
				rows := end - start
				for i := 0; i < rows; i++ {
					src := perm[start+i]
					row(src, a[i*m:(i+1)*m], buf)
					yb[i] = train.Y[src]
				}
				ag := blas64.General{Rows: rows, Cols: m, Stride: m, Data: a[:rows*m]}
				blas64.Syrk(blas.Trans, 1, ag, 1, g)
				blas64.Gemv(blas.Trans, 1, ag, blas64.Vector{N: rows, Inc: 1, Data: yb[:rows]}, 1, blas64.Vector{N: m, Inc: 1, Data: c})
				start = end
			}
			grams[r][k] = append([]float64(nil), g.Data...)
			rhs[r][k] = append([]float64(nil), c...)
		}
		return nil
	})
	if err != nil {
		return nil, stats, err
	}
	doneBase = int64(o.Repeats)
	// Phase 2: solve and score every (repeat, size, degree).
	type item struct{ r, k, d int }
	var items []item
	for r := 0; r < o.Repeats; r++ {
		for k := 0; k < nk; k++ {
			for d := range degs {
				items = append(items, item{r, k, d})
			}
		}
	}
	pts := make([]CurvePoint, len(items))
	usedQR := make([]bool, len(items))
	// score evaluates item i's coefficients on its training subset and on the holdout side.
	score := func(i int, beta []float64) error {
		it := items[i]
		n := o.Sizes[it.k]
		deg := degs[it.d]
		mm := basis.Terms(deg)
		if keep != nil {
			keep(it.r, n, deg, beta, usedQR[i])
		}
		perm := perms[it.r][:n]
		buf := make([]float64, m)
		y := make([]float64, n)
		pred := make([]float64, n)
		t := make([]float64, mm)
		for j, src := range perm {
			row(src, t, buf)
			pred[j] = dot(beta, t)
			y[j] = train.Y[src]
		}
		te, err := Metric(o.Metric, y, pred)
		if err != nil {
			return err
		}
		ph := make([]float64, holdout.N)
		for j := 0; j < holdout.N; j++ {
			ph[j] = dot(beta, holdX[j*m:j*m+mm])
		}
		he, err := Metric(o.Metric, holdout.Y, ph)
		if err != nil {
			return err
		}
		pts[i] = CurvePoint{Capacity: float64(deg), Size: n, Repeat: it.r + 1, TrainErr: te, HoldoutErr: he}
		return nil
	}
	err = parallel(ctx, len(items), prog, func(i int) error {
		it := items[i]
		n := o.Sizes[it.k]
		mm := basis.Terms(degs[it.d])
		full := grams[it.r][it.k]
		g := make([]float64, mm*mm)
		for a := 0; a < mm; a++ {
			copy(g[a*mm+a:(a+1)*mm], full[a*m+a:a*m+mm])
		}
		mirror(g, mm)
		beta, _, ok := ridgeSolve(g, rhs[it.r][it.k][:mm], mm, lambda*float64(n))
		if !ok {
			usedQR[i] = true // solved in phase 3
			return nil
		}
		return score(i, beta)
	})
	if err != nil {
		return nil, stats, err
	}
	// Phase 3: the systems Cholesky refused, by QR. For each repeat that has any, one pass of
	// block Householder updates of R (the triangular factor of [X y] over the nested rows)
	// gives, at each size, the factor of every degree at once: the QR factor of a column
	// prefix is the leading block of the full factor (Golub & Van Loan, Matrix Computations;
	// updating by stacking [R; new rows]; sections not cited, from memory). Tested against a
	// dense QR of each subset. The ridge rows √(λn)·I are appended at each size.
	need := make([]map[int][]int, o.Repeats) // repeat → size index → item indexes
	for i, q := range usedQR {
		if q {
			it := items[i]
			if need[it.r] == nil {
				need[it.r] = map[int][]int{}
			}
			need[it.r][it.k] = append(need[it.r][it.k], i)
		}
	}
	var qrRepeats []int
	for r := range need {
		if need[r] != nil {
			qrRepeats = append(qrRepeats, r)
		}
	}
	err = parallel(ctx, len(qrRepeats), nil, func(qi int) error {
		r := qrRepeats[qi]
		perm := perms[r]
		cols := m + 1
		rext := mat.NewDense(cols, cols, nil)
		buf := make([]float64, m)
		start := 0
		for k, n := range o.Sizes {
			for start < n {
				if err := ctx.Err(); err != nil {
					return err
				}
				end := min(start+block, n)
				st := mat.NewDense(cols+end-start, cols, nil)
				st.Slice(0, cols, 0, cols).(*mat.Dense).Copy(rext)
				for j := start; j < end; j++ {
					dst := st.RawRowView(cols + j - start)
					row(perm[j], dst[:m], buf)
					dst[m] = train.Y[perm[j]]
				}
				rext = upperFactor(st, cols)
				start = end
			}
			idx := need[r][k]
			if len(idx) == 0 {
				continue
			}
			rk := rext
			if lam := lambda * float64(n); lam > 0 {
				st := mat.NewDense(cols+m-1, cols, nil)
				st.Slice(0, cols, 0, cols).(*mat.Dense).Copy(rext)
				sq := math.Sqrt(lam)
				for j := 1; j < m; j++ {
					st.Set(cols+j-1, j, sq)
				}
				rk = upperFactor(st, cols)
			}
			for _, i := range idx {
				mm := basis.Terms(degs[items[i].d])
				beta, err := triSolve(rk, mm, m)
				if err != nil {
					return fmt.Errorf("ridge degree %d, size %d: %w", degs[items[i].d], n, err)
				}
				if err := score(i, beta); err != nil {
					return err
				}
			}
		}
		return nil
	})
	stats.Systems = len(items)
	for _, q := range usedQR {
		if q {
			stats.QRSolves++
		}
	}
	return pts, stats, err
}

// upperFactor returns the cols×cols upper-triangular factor R of the Householder QR of a.
func upperFactor(a *mat.Dense, cols int) *mat.Dense {
	var qr mat.QR
	qr.Factorize(a)
	var r mat.Dense
	qr.RTo(&r)
	out := mat.NewDense(cols, cols, nil)
	out.Copy(r.Slice(0, cols, 0, cols))
	return out
}

// triSolve solves R[:mm,:mm] β = R[:mm, rhsCol] by back substitution, refusing a factor whose
// diagonal has an entry below 1e-13 of its largest (rank deficient to working precision).
func triSolve(r *mat.Dense, mm, rhsCol int) ([]float64, error) {
	var dmax float64
	for i := 0; i < mm; i++ {
		dmax = math.Max(dmax, math.Abs(r.At(i, i)))
	}
	beta := make([]float64, mm)
	for i := mm - 1; i >= 0; i-- {
		d := r.At(i, i)
		if !(math.Abs(d) > 1e-13*dmax) {
			return nil, ErrIllConditioned
		}
		s := r.At(i, rhsCol)
		for j := i + 1; j < mm; j++ {
			s -= r.At(i, j) * beta[j]
		}
		beta[i] = s / d
	}
	return beta, nil
}
