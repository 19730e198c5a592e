// Package envelope computes saturation points (bubble and dew points),
// vapour-fraction (quality) points, phase envelopes and critical points of
// mixtures described by a cubic equation of state (thermo/eos).
//
// # Overview
//
// A Solver belongs to one eos.Mixture and one goroutine. Its methods are
//
//   - BubblePressure, DewPressure (T given) and BubbleTemperature,
//     DewTemperature (P given), each returning the incipient phase;
//   - QualityPressure and QualityTemperature for a vapour fraction β in
//     (0, 1);
//   - Envelope, the phase envelope traced by continuation with its
//     critical point(s), cricondenbar, cricondentherm and optional quality
//     lines;
//   - CriticalPoints, the direct calculation of critical points, an
//     independent check of the envelope's.
//
// # Equations
//
// With X = (ln K_1, …, ln K_n, ln T, ln P), K_i = y_i/x_i, and the phase
// compositions x_i = z_i/(1 − β + βK_i), y_i = K_i·x_i of a feed z split
// into a fraction β of phase y, every point of a phase boundary solves
// (Michelsen 1980)
//
//	F_i     = ln K_i + ln φ_i(y, T, P) − ln φ_i(x, T, P) = 0,   i = 1..n,
//	F_{n+1} = Σ_i (y_i − x_i) = 0,
//	F_{n+2} = X_s − S = 0,
//
// where the last equation fixes one variable (ln T, ln P or one ln K_i).
// Bubble points have β = 0 (x = z), dew points β = 1 (y = z). Newton's
// method uses the analytic ∂ln φ/∂T, ∂ln φ/∂P and ∂ln φ/∂n of thermo/eos,
// which give the full Jacobian from two fugacity evaluations.
//
// # Saturation points
//
// A point at given T (or P) starts from Wilson's K-values with the
// unknown from the Rachford–Rice-type condition Σ z_i(K_i − 1)/(1 − β +
// βK_i) = 0 on them, takes successive-substitution steps ln K_i ← ln φ_i^x
// − ln φ_i^y with one Newton step on the unknown each, then Newton on the
// full system (Michelsen & Mollerup 2007, ch. 12). A solve that approaches
// the trivial solution (Σ ln K_i² < 1e-5, the incipient phase equal to
// the feed) is rejected, never reported as a point; so is a solution whose
// "vapour" is denser than its "liquid" (a point of the other kind). When
// the direct solve fails, or when Hint.Branch asks for the lower or upper
// of several points (the two dew pressures of the retrograde region), the
// phase envelope is traced and Newton is started from each bracketing
// pair of envelope points. No bracketing pair means no point: a
// *NoSaturationError says why (above the cricondentherm, above the
// cricondenbar, or no point of this kind at the specification).
//
// # Phase envelope
//
// The trace (Michelsen 1980) starts at the dew point at StartPressure and
// keeps β = 1, so that y is the feed throughout and K_i = z_i/x_i with x
// the incipient phase. After each converged point the sensitivity vector
// dX/dS is solved from J·dX/dS = e_{n+2} with the factored Jacobian; the
// next specified variable is the component of X with the largest
// |dX_i/dS| (the most sensitive), and the step is set so that, to first
// order, no ln T or ln P moves by more than h and no ln K by more than 3h
// (h ≤ MaxStep, grown ×1.6 after Newton solves of ≤ 2 iterations, ×1.25
// after 3, cut ×0.6 after 6 or more, and halved after a failure). The
// initial estimate of the next point is the cubic Hermite extrapolant
// through the last two points with their sensitivities as slopes (linear
// when unsafe).
//
// Near the critical point the ln K's dominate the sensitivity and become
// the specified variable. When the specified ln K_s would come within one
// step of zero, the step jumps to −ln K_s: across the critical point, where
// all ln K change sign and the roles of the phases swap. The critical
// point is located by solving two envelope points at ln K_c = ±δ (δ ≤ 0.01,
// c the component whose ln K changes most across the jump) and evaluating
// the cubic Hermite interpolant between them at ln K_c = 0 (error O(δ⁴)).
//
// Labels: points before the first critical crossing (from the
// low-pressure dew point) are dew points (the feed is the vapour), points
// after it bubble points; each further crossing swaps the label. The
// equation-of-state root of each phase follows the same rule: the phase
// labelled vapour takes the vapour root, the other the liquid root.
//
// The cricondenbar and cricondentherm are the exact conditions dP/ds = 0
// and dT/ds = 0 along the envelope. Where the direction of travel
// (oriented sensitivity) changes the sign of d ln P (or d ln T) between two
// points, the root of g = dX_o/dX_v (X_o = ln P or ln T, X_v the variable
// that changes most over the interval) is found by Illinois regula falsi,
// each iterate a converged envelope point and g read from its sensitivity
// vector.
//
// The trace ends at the bubble point at StopPressure (Report.Stop =
// StopLowPressure), or reports why it stopped. Quality lines are traced in
// the same way from StartPressure with β fixed and end at the critical
// point, where all of them meet. A feed with one component present is
// handled as a pure component: its envelope is eos.VapourPressure from the
// saturation temperature at StartPressure to the critical point, which
// every cubic of thermo/eos reproduces exactly (Tc, Pc of the input).
//
// # Metastable points
//
// A traced two-phase boundary is the boundary of the equilibrium system
// only where the feed, at that (T, P), is stable against every phase other
// than the incipient one. Where it is not (a feed that splits into two
// liquids, such as a CO2-rich stream with methane and nitrogen below about
// 160 K), the vapour–liquid boundary still solves the equations above but
// lies inside a two- or three-phase region: a T–P flash just outside it
// finds two liquids, and the true phase boundary is a three-phase line
// this package does not trace. Envelope therefore gives every point of the
// phase envelope a verdict (EnvelopePoint.Checked, Metastable, TPD,
// ThirdPhase; the count and the T, P range in EnvelopeReport). The test is
// Michelsen's (1982) tangent-plane criterion on the feed at the point: the
// plane that touches the Gibbs surface at the feed touches it at the
// incipient phase too, and the point is metastable when a trial phase lies
// below it (tpd < −1e-8). The trials are Wilson's liquid- and vapour-like
// compositions from the feed, a liquid-like one from the incipient phase,
// pure-component-like trials of water, alcohols and glycols, and the
// stationary point carried from the neighbouring point; trials that fall
// back onto the feed or the incipient phase end early. The full set runs
// at the ends and every 0.3 in Σ|Δln T| + |Δln P| along the envelope, the
// carried trial at every point, and a third phase found by a full test is
// carried backward to the previous one. The verdict agrees with the
// stability test of thermo/flash at every point of the test streams (see
// TestFlashConsistency). EnvelopeOptions.NoStabilityCheck skips it. Quality
// lines and saturation points solved alone are not tested.
//
// # Critical points
//
// CriticalPoints solves the Heidemann & Khalil (1980) conditions in the
// scaled form of Michelsen (1984): the smallest eigenvalue of
// B_ij = δ_ij + √(z_i z_j)·n∂²(A^r/RT)/∂n_i∂n_j (fixed T, V) is zero, and so
// is the cubic form along its eigenvector, computed as a central difference
// of the quadratic form along that direction (see CriticalPoints).
//
// # Units
//
// SI: K, Pa, m³/mol. Compositions are mole fractions (the feed is
// normalised).
//
// # Errors
//
// Bad arguments give *InputError naming the field. A specification with
// no saturation point gives *NoSaturationError (errors.Is
// ErrNoSaturation), a solve that does not converge *ConvergenceError
// (errors.Is ErrNotConverged) with its best estimate and residual, and a
// cancelled context an error matching the context's error. Nothing here
// panics on user input.
//
// # Allocation
//
// Solves work in the Solver's preallocated buffers: a saturation point
// into a caller-owned Point allocates nothing on the direct path; an
// envelope allocates its output (points and their ln K, in slabs of 64
// points) and nothing per Newton iteration.
//
// Results are engineering estimates from published models; they do not
// replace the codes and licensed engineers responsible for the design of
// pressure, relief and flare systems.
//
// References:
//   - Michelsen, M.L.: Calculation of phase envelopes and critical points
//     for multicomponent mixtures. Fluid Phase Equilib. 4, 1–10 (1980).
//   - Michelsen, M.L., Mollerup, J.M.: Thermodynamic Models: Fundamentals &
//     Computational Aspects, 2nd ed., ch. 12. Tie-Line Publications (2007).
//   - Heidemann, R.A., Khalil, A.M.: The calculation of critical points.
//     AIChE J. 26(5), 769–779 (1980).
//   - Michelsen, M.L.: Calculation of critical points and phase
//     boundaries in the critical region. Fluid Phase Equilib. 16, 57–76
//     (1984).
//   - Michelsen, M.L.: The isothermal flash problem. Part I. Stability.
//     Fluid Phase Equilib. 9, 1–19 (1982).
//   - Crowe, A.M., Nishio, M.: Convergence promotion in the simulation of
//     chemical processes — the general dominant eigenvalue method. AIChE
//     J. 21(3), 528–533 (1975).
//   - Wilson, G.M.: A modified Redlich–Kwong equation of state,
//     application to general physical data calculations. AIChE 65th
//     National Meeting, Cleveland, paper 15C (1969).
package envelope
