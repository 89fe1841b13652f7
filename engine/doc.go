// Package engine fits linear regression models by least squares and
// computes each observation's leverage and influence, then judges rows
// against published rules of thumb. It is pure computation: no I/O, no
// clock, no logging, no background goroutines (a large call may use a few
// goroutines internally and waits for them before it returns).
//
// # Models
//
// A model is a response column, a list of terms and an optional intercept:
//
//	m, err := engine.NewModel("signal", []string{"conc", "conc^2", "log(flow)", "conc*temp"}, true)
//	X, y, err := m.Design(columns)      // columns: map[string][]float64
//	fit, err := engine.Refit(m, X, y)
//	inf, verdicts := engine.Assess(fit, engine.DefaultCutoffs())
//
// (Assess is Judge(Diagnose(fit), c) in one pass; Judge alone re-judges a
// table under other cutoffs.)
//
// Term grammar (our own notation):
//
//	term   = factor { "*" factor }
//	factor = atom [ "^" power ] | "group" "(" name ")"
//	power  = 1..20 (MaxPower), decimal digits
//	atom   = name | "log" "(" name ")"    natural log
//	name   = ident | quoted
//	ident  = (letter | "_" | ".") { letter | digit | "_" | "." }
//	quoted = `"` { any character, `""` for a quote } `"`
//
// so "x", "x^2", "x^10", "x*z", "log(x)", "log(x)^2", "group(batch)",
// "group(batch)*months" and `"flow rate (l/min)"` are terms. Malformed
// terms give a *TermError whose message points a caret at the offending
// character.
//
// # Data with text, groups and weights
//
// Build takes numeric and text columns and returns a Design: the model
// with the levels of its group columns, X, y and the row weights.
//
//	m.Weight, _ = engine.ParseWeighting("inverse(conc^2)") // or "w", a column
//	d, err := m.Build(engine.Data{Num: nums, Text: texts})
//	fit, err := d.Fit()                                  // RefitWeighted
//	checks := engine.CheckForm(fit, inf)
//
// group(batch) codes a column of labels by indicators, one per level but
// the reference, the first level in byte order (group.go); a level first
// seen later gives ErrNewLevel for one row (DesignRowData) and is added by
// WithLevels or the next Build. A weighted fit (weights.go) minimises
// Σ w (y - x'b)², with every influence measure from the weighted hat
// matrix. Pool tests whether the groups of a one-group, one-line model can
// share a slope and an intercept (ICH Q1E, pool.go). CheckForm
// (formcheck.go) tests the form: lack of fit, Durbin-Watson,
// Breusch-Pagan, PRESS.
//
// # Fit
//
// Refit never forms the normal equations. It centres (with an intercept)
// and scales the columns, computes a Householder QR over chunks of rows,
// merges the chunk factors (TSQR), and refines the solution on the
// corrected seminormal equations R'R dc = W'r with residuals accumulated
// in double-double arithmetic against the original X. A derived term (x^3
// when x is a term too, x^9*x, x*z) enters at its exact value, the
// product of its factors in double-double, not at its rounding in X. Two
// routes, chosen by the scaled condition number κ (Fit.Condition):
//
//   - κ <= 1e4, the usual case: R from the binary64 QR, the diagnostics
//     in binary64. The refined solution is kept unrounded (the last
//     correction beside it), and the residuals come from it.
//   - 1e4 < κ <= 1e10, the extended route: one more pass over the rows
//     computes R again in double-double, preconditioned by the binary64
//     R0 (Y = W R0^-1 has nearly orthonormal columns; R = chol(Y'Y) R0),
//     the solution is refined in double-double, and (X'X)^-1, the
//     standard errors and every row's leverage and (X'X)^-1 x_i are
//     computed in double-double from it. Unscaled, Leverage and Predict
//     use the same factors.
//
// On the NIST StRD linear least-squares datasets it reproduces the
// certified values to the precision the double-precision data allow
// (TestNIST: 13 digits or more on every dataset and field, 14 on Filip's
// coefficients).
//
// # Accuracy
//
// The promise: for every design with a scaled condition number up to
// 1e10, every field of the fit and of its table (coefficients, standard
// errors, t, p, confidence limits, RSS, σ, R², F, (X'X)^-1, residuals,
// fitted values, leverage, studentized residuals, Cook's distance,
// DFFITS, DFBETAS, COVRATIO and the outlier p-values, and Leverage and
// Predict at new rows) agrees with the exact least-squares values of the
// data as given (derived terms at their exact values) to 1e-9 relative.
// A value that is nearly zero by cancellation, such as a residual or a
// DFBETAS far smaller than the terms it is computed from, is held to that
// level relative to those terms instead. Above 1e10 Refit refuses with
// ErrIllConditioned, the condition number and the terms involved.
//
// The routes' errors, and what was measured against exact rational
// arithmetic (TestExactOracleIllConditioned, TestExtendedLarge):
//
//	binary64 route   about κ·1e-16 relative     worst 1.2e-10 (κ up to 9.3e3)
//	extended route   about κ·1e-31 (factors),   worst 1e-14 (κ up to 7.8e9:
//	                 κ²·1e-31·|r|/|Xb| (coef.)  near-collinear pairs, uncentred
//	                                            cubic, quartic, degree 10)
//
// The limit is set by the coefficients: with residuals in double-double
// their attainable accuracy is about κ²·1e-31 times the ratio of the
// residuals to the fitted values, 1e-11 at 1e10 and 1e-9 at 1e11, so 1e10
// keeps two digits of margin. With the binary64 R instead (but exact derived terms and
// unrounded coefficients), the same cases miss by 6e-7 to 2e-4 (DFBETAS):
// leverage and (X'X)^-1 are then good to about κ·eps only.
//
// Weighted fits (RefitWeighted) take the same routes by the condition
// number of the scaled rows √w_i x_i, with the weights applied in
// double-double on the extended route; their design is taken as given
// (a derived term keeps its rounded value in X). Measured against exact
// rational arithmetic on the rows √w_i [x_i y_i] (TestWeightedAsGiven,
// TestFilipWeightedExact): 4.0e-13 at κ = 1.4e3 (binary64), 8.8e-16 at
// 2.0e6, 6.9e-16 at 2.9e9, Filip's coefficients to 15 digits at 4.0e9.
//
// The cost of the extended route at n = 1e5, p = 5, κ = 1e9, against the
// binary64 route on the same size (BenchmarkRoutes). Counted in
// instructions (callgrind, one goroutine), which the load of a shared
// machine does not move: the fit 3.9e8 against 1.0e8 (ratio 3.9), the
// full table 7.1e8 against 2.1e8 (3.4). In time, median of the ratios of
// five alternating runs on a loaded machine: 4.1 and 2.7. The cost is one
// more pass for R, the refinement passes in double-double (two, three
// near 1e10) and about three times the per-row work in Diagnose; it grows
// as n p².
//
// # Diagnostics
//
// With X the n x p design, b the estimates, e = y - Xb, s² = RSS/(n-p) and
// C = (X'X)^-1 (Cook 1977; Belsley, Kuh & Welsch 1980; Hoaglin & Welsch
// 1978):
//
//	leverage            h_i = x_i' C x_i               (Σ h_i = p)
//	internal stud.      r_i = e_i / (s √(1-h_i))
//	deleted variance    s_(i)² = ((n-p) s² - e_i²/(1-h_i)) / (n-p-1)
//	external stud.      t_i = e_i / (s_(i) √(1-h_i))
//	Cook's distance     D_i = r_i² h_i / (p (1-h_i))
//	DFFITS              t_i √(h_i/(1-h_i))
//	DFBETAS_ij          (C x_i)_j e_i / ((1-h_i) s_(i) √C_jj)
//	COVRATIO            (s_(i)²/s²)^p / (1-h_i)
//	outlier p           2 P(T_{n-p-1} > |t_i|)
//	Bonferroni p        min(1, n · outlier p)   (Cook & Weisberg 1982)
//
// A weighted fit (RefitWeighted, weights.go) has every measure of its
// scaled rows √w_i [x_i y_i]: h_i = w_i x_i'(X'WX)^-1 x_i and √w_i e_i in
// place of e_i, s² = Σ w e²/(n-p); Obs.Residual stays y_i - x_i'b.
//
// All are computed in closed form from the QR factors in O(n p²); none
// needs a leave-one-out refit. Values that are undefined (h_i = 1, or
// n-p-1 = 0 for the deletion measures) are NaN. Tail probabilities use the
// regularized incomplete beta function and keep their relative accuracy
// far below 1e-16.
//
// # Cutoffs
//
// Two families are computed for every row and reported as flags:
//
//	absolute        D > F(0.5; p, n-p) (Cook 1977; or D > 1)
//	                |DFFITS| > 1, |DFBETAS| > 1
//	size-adjusted   D > 4/n (Bollen & Jackman 1990)
//	                |DFFITS| > 2√(p/n), |DFBETAS| > 2/√n (Belsley, Kuh & Welsch 1980)
//	                h > 2p/n (Hoaglin & Welsch 1978)
//	                |COVRATIO-1| > 3p/n (Belsley, Kuh & Welsch 1980)
//
// A row is influential when it crosses a cutoff of the deciding family
// (Cutoffs.Family, absolute by default) and notable when it crosses only
// cutoffs of the other family. It is an outlier when its Bonferroni p is
// below Cutoffs.Alpha (0.05), or, with GrubbsTest, when the two-sided Grubbs
// test on the residuals (NIST/SEMATECH e-Handbook §1.3.5.17.1) flags it.
//
// These cutoffs are guides, not tests: they point at rows worth a second
// look. The engine flags; it never deletes or alters a measurement, and
// decisions stay with qualified staff under local quality procedures.
//
// # Predictions
//
// At a point x0, given as a value for each predictor column
// (Fit.PredictAt builds the design row through the model, so powers, logs
// and products work; Fit.PredictRow takes a design row; Fit.PredictGrid
// varies one column over a grid with the others fixed, for bands), with
// b the estimates, s = Sigma, ν = DF = n-p and t = t(1-(1-level)/2; ν):
//
//	fitted value          ŷ0 = x0'b   (accumulated in double-double)
//	leverage              h0 = x0'(X'X)^-1 x0 = |R^-T T^-T x0|²   (Fit.Leverage)
//	standard error        se = s √h0
//	confidence interval   ŷ0 ± t s √h0                      (the mean response)
//	prediction interval   ŷ0 ± t s √(1/(m w0) + h0)         (the mean of m new readings)
//
// IntervalOptions sets the level (default 0.95), m (default 1) and w0, the
// weight of each new reading on the scale of the fit's weights (default
// 1: a new reading has variance σ²/w0). Nothing forms X'X: h0 comes from
// the triangular factor of the scaled design. For a weighted fit the same
// formulas hold with s² = Σ w_i e_i²/(n-p) and (X'WX)^-1 in place of
// (X'X)^-1, provided Sigma and Leverage (of a design row without its
// weight) are the weighted ones. Checked against R's predict.lm.
//
// ShiftAt states how far the curve moved at a checkpoint x0 between an
// earlier fit and a later one, in the response's units: Change =
// ŷ_new(x0) - ŷ_old(x0) with standard error s √(h_old - h_new) when the
// earlier fit's rows are all among the later one's, s √(h_old + h_new)
// when the fits share no row.
//
// # Inverse prediction
//
// For a line or polynomial in one predictor column x (every term a power
// of x, with or without an intercept), f(x) = Σ b_j x^k_j, a reading y0
// (the mean of m new readings) and the calibrated range [lo, hi]
// (NewCalibration; by default the range of x in the fit's data),
// Calibration.Invert returns:
//
//	estimate            x̂ with f(x̂) = y0 in [lo, hi]; Status says when
//	                    there is none (below-range, above-range) or
//	                    several (Roots lists them; Estimate is NaN)
//	uncertainty         u = s √(1/(m w0) + h(x̂)) / |f'(x̂)|   (delta method)
//	inversion set       {x in [lo, hi] : |y0 - f(x)| <= t s √(1/(m w0) + h(x))}
//	                    (NIST/SEMATECH e-Handbook §4.5.2.1; for a line,
//	                    Fieller's interval)
//
// The set's ends are the roots of the band equation
// g(x) = (y0 - f(x))² - t²s²(1/(m w0) + h(x)), a polynomial of degree 2k
// (k the highest power), with f and h evaluated from the fit as above.
// Its roots (and those of f(x) - y0) are isolated by interpolating at
// Chebyshev points of the range and splitting the range at the critical
// points of the interpolant, found by recursion over its derivatives; on
// each monotone piece a sign change is refined by Brent's bracketed
// search on g itself until the bracket is at most 4·eps·|x| + eps·(hi-lo)
// wide (eps = 2^-52). A double root where g touches zero without changing
// sign is not reported.
//
// The answer says plainly what kind of set it is (Shape): one bounded
// interval; one interval that reaches an end of the range (the data do
// not bound x there, and the open bound of Interval is NaN, not the range
// end); the whole range; several disjoint intervals (Parts lists them,
// Interval is NaN); or empty. Inverse.Note words it. An inverse
// prediction of a fit with p <= 6 takes well under 50 µs, predictions
// over a 1,000-point grid at p = 6 under 1 ms (BenchmarkInvert,
// BenchmarkPredictGrid).
package engine

// Caution is the one caution every output of plumb carries (pages,
// reports, alerts, inspect, audit exports): plumb flags, and decisions
// stay with people.
const Caution = "plumb flags; it never deletes or alters a measurement. " +
	"Decisions to keep, correct, re-measure or exclude a value stay with " +
	"qualified staff under local quality procedures and codes."
