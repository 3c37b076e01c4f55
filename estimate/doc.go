// Package estimate answers the planner's question "how much more data must we collect, and
// with which model capacity?": it fits learning curves, extrapolates them with bootstrap
// confidence intervals, and computes published closed-form sample-size criteria.
//
// # Curve fitting and extrapolation (the API the CLI and the learning-curve code share)
//
//	type Point struct{ N, Err float64; Repeat int }   // one measured (n, error)
//	func Extrapolate(points []Point, opts *Options) (*Result, error)   // nil opts = defaults
//	func Predict(f Fit, n float64) float64
//
// Extrapolate fits every curve family of Options.Families (default all of Families) by
// weighted nonlinear least squares (LeastSquares: Levenberg–Marquardt with bounds), the
// weights coming from the spread of the error across repeats at each size. It chooses the
// family that best predicts the largest sizes when refitted on the smaller ones (the
// backtest; AIC breaks ties and serves when there are too few sizes to hold any out), and
// then bootstraps the chosen family over repeats (or over residuals when each size has one
// repeat) to give percentile and BCa intervals (Efron & Tibshirani 1993, ch. 13–14) for the
// asymptote, for n* (the n at which the curve reaches Options.Target) and for the error
// at a planned n (Options.At). A target at or below the asymptote (or inside its interval)
// is reported as not reachable with this capacity: more data will not get there, more
// capacity might. Optional training-error points (Options.Train) let it diagnose, size by
// size, where the model is variance-limited (overfitting) and how the train–holdout gap
// shrinks with n.
//
// Honesty rules: the flat family (a constant) competes while its AIC is within 10 of the
// best family's, and wins when its backtest is within twice the relative standard error of
// the held-out means of the best one (Result.Flat); an asymptote whose interval spans more
// than a quarter of [0, level] or that lies far below the data is reported as not identified
// (Result.AsymptoteUnidentified), a lower end that is the bound a ≥ 0 as such
// (AsymptoteLoAtBound); an n* beyond Horizon (1000) × the largest size is flagged
// (NStarBeyondHorizon; the number is kept) and counts as not reachable.
//
// Families (err as a function of the training size n; a ≥ 0 is the asymptote, c > 0):
//
//	pow3  a + b·n^(−c)      n* = (b/(T−a))^(1/c)      (inverse power law)
//	pow2  b·n^(−c)          n* = (b/T)^(1/c)          (asymptote 0)
//	exp3  a + b·e^(−c·n)    n* = ln(b/(T−a))/c
//	log2  a + b·ln n        n* = e^((T−a)/b), b < 0   (no asymptote; reported as 0)
//	flat  a                 never below a             (the error no longer falls)
//
// Predict evaluates a fitted family; n* comes from each family's closed form, or from
// NStarNumeric (bracketing and bisection on ln n) for a family without one. FitFamily is the
// exact fit Extrapolate reports for one family. SaveResult, SavePoints and SaveSampleSize
// write ss_est_estimates, ss_est_fits, ss_est_points and ss_est_criteria (migrations 0005, 0008)
// inside the caller's transaction; PlotPoints draws a result for estimate points --plot.
//
// # Least squares
//
// LeastSquares fits an arbitrary model y ≈ f(x; θ), with an analytic or finite-difference
// Jacobian, and returns parameter standard errors sqrt(diag(s²(JᵀJ)⁻¹)), s² = RSS/(n−p);
// it is tested against the NIST StRD nonlinear datasets from both starting points.
// LinearLS solves linear least squares by Householder QR with column scaling and
// Björck's iterative refinement in double-double arithmetic; PolyDesign builds polynomial
// design matrices. Both are tested against the NIST StRD linear datasets (Filip included).
//
// # Closed-form criteria
//
// RileyBinary and RileyContinuous compute the sample-size criteria of Riley et al. for
// prediction models (BMJ 2020;368:m441; Statistics in Medicine 2019;38:1262–1275 and
// 1276–1296); OLSHoldoutMSE gives the expected holdout error of ordinary least squares,
// σ²(1 + p/n) for a fixed design and σ²(1 + p/(n − p − 1)) for a Gaussian random design
// (Hastie, Tibshirani & Friedman, The Elements of Statistical Learning). These are
// planning estimates, not guarantees; clinical models need qualified statistical review.
//
// # SQL surface (see sql.go)
//
// est_pow3(n, a, b, c), est_nstar_pow3(T, a, b, c), est_predict(family, n, params_json),
// est_riley_binary(p, r2cs, prevalence, shrinkage), est_riley_continuous(p, r2, mean, sd,
// shrinkage), est_ols_holdout_mse(sigma2, p, n, design), est_bca_level(z0, a, alpha), and
// the aggregate est_fit_pow3(n, err) → JSON.
package estimate
