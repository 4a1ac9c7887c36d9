// Package uncertainty evaluates measurement uncertainty for the trim station
// following JCGM 100:2008 (GUM, the law of propagation of uncertainty) and
// JCGM 101:2008 (propagation of distributions by Monte Carlo).
//
// It has four layers:
//
//   - Budget arithmetic: Component, TypeA, Rectangular, Resolution, Combine
//     (root-sum-square with the Welch–Satterthwaite effective degrees of
//     freedom, JCGM 100 G.2b), CoverageFactor and Expand (Student t, JCGM 100
//     G.3/G.4), Spec (an instrument's ±(of reading + of range) accuracy).
//   - The straight-line fit of a sweep with its uncertainty, FitLine, which
//     includes the systematic errors of the meter and the source that every
//     point of a sweep shares, and FitLineLS, the textbook fit whose
//     uncertainty comes from the residual scatter alone (JCGM 100 H.3).
//   - The quadratic fit of a sweep, FitQuadratic: the same model with a
//     transfer η = β0 + β1·(ξ − X0) + β2·(ξ − X0)², the same weights and the
//     same four systematic errors (their sensitivities to β2 are derived at
//     FitQuadratic), and LackOfFit, which says whether a fitted line or
//     quadratic describes a sweep: the F test against pure error where
//     stimulus levels repeat (NIST/SEMATECH e-Handbook §4.4.4), the reduced
//     chi-square otherwise.
//   - Monte Carlo (JCGM 101): MonteCarloModel propagates distributions
//     through any model with a fixed number of trials or the adaptive
//     procedure of §7.9, keeping the model values so that MCRun gives the
//     probabilistically symmetric (§7.7) or shortest (§7.8) coverage
//     interval of each output or of any linear combination of them;
//     Validate checks a GUM interval against it (§8). MonteCarloLine is the
//     sweep's line fit on it, with the pooled Type A scale drawn once per
//     trial; MonteCarlo keeps the earlier draw for old records.
//
// # Units
//
// Stimulus x and output y are in volts, gains and accuracy terms are plain
// fractions (30 ppm = 30e-6), offsets are in volts. b0 is in volts, b1 in
// V/V, the quadratic's b2 in 1/V (V per V²). A standard uncertainty is
// always in the unit of the quantity it belongs to.
//
// # Measurement model of FitLine
//
// The device under test has the true transfer η = β0 + β1·(ξ − X0), with ξ
// the true stimulus and η the true output; X0 is a centring point (0 gives
// the plain intercept at zero stimulus). The station programs the source to
// x_i and reads the mean output y_i. The source delivers and the meter reads
//
//	ξ_i = x_i·(1 + g_s) + o_s
//	y_i = η_i·(1 + g_m) + o_m + e_i + r_i
//
// where
//
//   - g_m, o_m are the meter's gain and offset errors and g_s, o_s the
//     source's. Each is unknown but the SAME for every point of a sweep (one
//     range, one short time), with best estimate 0 and a rectangular
//     distribution within the instrument specification: g has half-width
//     OfReading, o half-width OfRange·Range (JCGM 100 §4.3.7, u = a/√3).
//   - e_i is the random error of the mean y_i, standard uncertainty
//     URandom_i (s/√n of the readings) with DOFRandom_i = n − 1, independent
//     from point to point.
//   - r_i is the meter's rounding to its resolution q, rectangular with
//     half-width q/2 (u = q/(2√3)), taken independent from point to point
//     (the levels differ by many counts). It is counted in addition to the
//     Type A scatter, which is conservative when the noise spans many counts.
//
// The estimate (b0, b1) is the weighted least-squares line through (x_i,
// y_i), weights 1/u_i² with u_i² = URandom_i² + (q/(2√3))², i.e. the fit
// with every error at its best estimate 0. The measurand (β0, β1) is the
// same fit through the corrected data (ξ_i, η_i). The sensitivity
// coefficients c = ∂β/∂(error), evaluated at the estimates, follow from
// fitting corrected data (least squares is linear in y and the model
// contains a constant term):
//
//   - meter gain: η_i = y_i/(1+g_m) scales every y, so both coefficients
//     scale: β = b/(1+g_m); ∂β0/∂g_m = −b0, ∂β1/∂g_m = −b1.
//   - meter offset: η_i = y_i − o_m shifts every y, so only the intercept
//     moves: ∂β0/∂o_m = −1, ∂β1/∂o_m = 0.
//   - source gain: ξ − X0 = (x − X0)(1+g_s) + X0·g_s, so the line in x is
//     y = [β0 + β1·X0·g_s] + β1(1+g_s)·(x − X0), i.e. b1 = β1(1+g_s) and
//     b0 = β0 + β1·X0·g_s; ∂β1/∂g_s = −b1, ∂β0/∂g_s = −b1·X0 (0 for X0 = 0).
//   - source offset: ξ − X0 = (x − X0) + o_s, so b0 = β0 + β1·o_s;
//     ∂β0/∂o_s = −b1, ∂β1/∂o_s = 0.
//   - per-point errors e_i, r_i: β_k = Σ a_ki·(y_i − e_i − r_i), with a_ki
//     the weighted least-squares weights of point i in coefficient k;
//     ∂β_k/∂e_i = ∂β_k/∂r_i = −a_ki.
//
// (Seen from the data instead: a meter that reads y·(1+g) makes the fit
// return b1·(1+g), a change of +b1·g. Only the sign of a whole sensitivity
// vector differs between the two views, which does not change any
// variance or covariance.)
//
// The coefficient covariance is Cov = CovRandom + CovSys with CovRandom =
// (XᵀWX)⁻¹ from the weighted fit (= Σ_i a_i a_iᵀ u_i²) and CovSys = Σ_j
// c_j c_jᵀ u_j² over the four systematic errors. CovSys is what an
// ordinary least-squares covariance misses: the shared errors do not show
// in the residuals and do not average down with the number of points, and
// the meter gain (and the source gain when X0 ≠ 0) correlates b0 with b1.
// The systematic errors do not change the residuals to first order (they
// are affine maps of the data), so ResidualU uses the random part only.
//
// # Degrees of freedom
//
// Every input has its own degrees of freedom: DOFRandom_i for the Type A
// part of point i, ∞ for the resolution and for the four systematic errors
// (rectangular limits taken from a specification are treated as exactly
// known, JCGM 100 G.4.2). The effective degrees of freedom of b0,
// of b1, or of any linear combination g0·b0 + g1·b1 (for example a
// predicted value, g = (1, x − X0)) is Welch–Satterthwaite (JCGM 100 G.2b)
// over all inputs, each contributing |g·c_j|·u_j. For the random part this
// means each point's mean contributes through its weight in the estimate:
// with n points of equal URandom and equal ν, centred at the weighted mean
// of x, the random part of u(b0) gets n·ν degrees of freedom — the pooled
// dof of all readings. The weighted fit takes the URandom_i as known; the
// residual scatter of the fit is not pooled into the dof. LineFit.Chi2
// and ResidualDOF are reported so a caller can check that the per-point
// uncertainties explain the scatter (Chi2/ResidualDOF near 1); a value
// well above 1 means nonlinearity or drift that this model does not cover.
//
// FitLineLS instead estimates one common standard deviation s from the
// residuals, with n − 2 degrees of freedom, as in JCGM 100 H.3; its inputs
// are marked Pooled so that they carry those n − 2 degrees of freedom once
// rather than being counted again by Welch–Satterthwaite.
//
// # Concurrency
//
// Every function is pure: arguments are not retained or modified, there is
// no shared state, and everything is safe for concurrent use. A LineFit is a
// plain value whose methods only read it. MonteCarlo is deterministic for a
// given seed and uses no global random source.
package uncertainty
