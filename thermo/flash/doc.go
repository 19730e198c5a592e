// Package flash computes phase stability and the isothermal (T–P) flash
// with up to three phases on the cubic equations of state of package eos.
//
// # Overview
//
// A Workspace (one per goroutine, reused) runs
//
//	ws.PT(ctx, T, P, z, opts, warm, res)   // T–P flash into res
//	ws.Stability(ctx, T, P, x, opts, out)  // tangent-plane test of a phase
//
// and allocates nothing once made: results go into a Result from
// NewResult (or a StabilityResult from NewStabilityResult) that the caller
// reuses, and Result.Estimate hands the converged state back as the warm
// start of the next call.
//
// # Stability
//
// A phase of composition x is stable when no trial composition w has a
// negative tangent-plane distance (Michelsen 1982a),
//
//	tpd(w) = Σ_i w_i (ln w_i + ln φ_i(w) − ln x_i − ln φ_i(x)) ≥ 0.
//
// Each trial is iterated on the modified function
// tm(W) = 1 + Σ_i W_i (ln W_i + ln φ_i(w) − d_i − 1) by successive
// substitution, ln W_i ← d_i − ln φ_i(w), for up to six steps and then by
// Newton's method in α_i = 2√W_i with the Hessian
// δ_ij + √(W_i W_j)·∂ln φ_i/∂W_j and step halving on tm (Michelsen &
// Mollerup 2007, ch. 10). Trials: Wilson's K-values, W = z·K (vapour-like)
// and W = z/K (liquid-like), the liquid-like one first when the feed is
// vapour-like; then pure-component-like trials (w_j = 0.999) for every
// water, alcohol or glycol component present and for CO2 or H2S making up
// at least 10 % of the feed; and, when any of those is present, for the
// heaviest component. A trial stops
//
//   - when tpd < −TPDTolerance (the phase is unstable);
//   - when Σ_i (ln W_i − ln x_i)² < 1e-4 for the reference x (trivial
//     solution) or < min(1e-2, 0.05·d_min) for a phase already found, d_min
//     the smallest such distance between two found phases (it is
//     converging to that phase; successive substitution decreases tm
//     monotonically toward that phase's tm = 0, so nothing negative is
//     passed on the way, and the bound tightens where phases are close);
//   - when its residual max|ln W_i + ln φ_i − d_i| is below 1e-9;
//   - when tm > 0.01 and the geometric extrapolation of the successive-
//     substitution decrease of tm leaves it above three quarters of its
//     value (it cannot become negative).
//
// # Phase split
//
// The cold path starts the split from both Wilson trials' compositions
// when both proved the feed unstable, then from the trial of lowest tpd,
// then from Wilson's K-values. The feed test stops at its first clearly
// unstable trial (tpd < −0.05); when none of those starts converges, the
// feed is tested again with every trial and the split started from each,
// lowest tpd first. That rescues feeds with water whose liquid-like
// Wilson trial lands across the aqueous parameter set's boundary (see
// eos.AqueousKijMode), where a pure-water-like trial leads to the split.
//
// Two phases: successive substitution ln K_i ← ln φ_i^L − ln φ_i^V with
// the Rachford–Rice equation solved in the window of Leibovici & Neoschil
// (1992) by safeguarded Newton (negative flash allowed while iterating,
// Whitson & Michelsen 1989), accelerated every fifth step by the
// dominant-eigenvalue extrapolation (Crowe & Nishio 1975); then Newton's
// method on the Gibbs energy (Michelsen 1982b) with the analytic Hessian
// built from ∂ln φ_i/∂n_j of each phase, a Levenberg shift where it is not
// positive definite, a step cut that keeps every mole number positive, and
// an Armijo line search on G. For each component the phase holding most of
// it is the dependent one, so trace amounts keep full relative precision.
// Near the solution (residual r with r² < 0.1·Tolerance, where the
// quadratic convergence of Newton's method should finish in one step) the
// step's end point is evaluated without ∂ln φ/∂n, which is computed only
// if another step turns out to be needed. When the residual at the point
// of the last Hessian was below 1e-3 and the last step cut the residual
// tenfold, the next step is a chord step: that Hessian's Cholesky factor
// with the current gradient, whose error contracts by a factor of the
// order of the distance from the factor's point, so the derivatives are
// not computed again near the solution.
// The split is converged when
//
//	max_{i,α,β} |ln f_i,α − ln f_i,β| ≤ Options.Tolerance (default 1e-10).
//
// Two phases of one composition satisfy that at every state (the trivial
// solution): a split that converges with two phases whose
// Σ_i (ln x_i,α − ln x_i,β)² < 1e-12 is not a split. Of two phases it
// leaves one (the warm path and Split then report no split; the cold path
// tries its next start), of three the smaller of the pair is removed and
// the rest solved again. A warm start carried across a bubble or dew point
// is what drives Newton's method there: the amount of the phase that
// should vanish stays just above the removal bound while its composition
// runs into the other phase's.
//
// Three phases: when the converged two-phase split fails the stability
// test, the trial that proved it unstable is added and the amounts are
// found by Michelsen's (1994) convex minimisation of
// Q(β) = Σ_k β_k − Σ_i z_i ln Σ_k β_k/φ_ik over β ≥ 0 (a phase whose bound
// is active vanishes and is removed); successive substitution with that
// split is followed by the same Newton method for all phases. The result
// is tested again; a result still unstable at Options.MaxPhases is a
// *ConvergenceError, never returned as an answer.
//
// # Warm start
//
// With an Estimate of two or three phases (compositions, or ln K for two)
// the split starts from it, mass-balanced for the new feed, with Newton
// steps and no stability test of the feed; the converged split is then
// tested for stability. Any failure (no root of Rachford–Rice, a trivial
// or out-of-range split, non-convergence, instability) runs the cold path
// instead, so an estimate changes the work done, never the answer.
// Report.Path says "cold", "warm" or "warm-fallback".
//
// A converged two-phase result also carries the sensitivities of its
// K-values, found from the Newton Hessian's factor and ∂ln φ/∂T, ∂ln φ/∂P
// of the phases by differentiating fugacity equality at fixed feed
// (Michelsen & Mollerup 2007, ch. 11),
//
//	H·∂n/∂θ = −∂g/∂θ,  θ = T, P,
//
// and Result.Estimate hands them on with the state (T, P): a warm start
// at (T′, P′) begins from ln K shifted to first order, which leaves a
// residual of second order in the change of state (about 1e-4 instead of
// 3e-2 for a step of 0.5 K and 0.5 %, one Newton step fewer). The same
// solution gives the state derivatives of Result.Derivatives (total heat
// capacity and the like, with the phase change), which package
// stateflash uses for its outer Newton iteration. An estimate of the very
// state it is applied to (the confirmation of a nested solver) is first
// evaluated without ∂ln φ/∂n. The properties of a phase whose last
// evaluation was at its final composition with ∂ln φ/∂T (the end of a
// Newton solve) are assembled from that evaluation's root and mixing sums
// (eos.Mixture.PropertiesFromFugacity) instead of being solved again.
//
// Workspace.Split runs the same Newton solve from an estimate without the
// stability test (Report.Path "unverified"), for nested solvers that
// confirm only their final state with PT (package stateflash).
//
// # Aqueous phases
//
// When the mixture carries an aqueous interaction-parameter set
// (eos.Mixture.Aqueous; by default the Søreide & Whitson 1992 k_ij^AQ for
// any fluid with water, see eos.AqueousKijMode), every composition with a
// water mole fraction above eos.AqueousWaterFraction (0.5) — a phase of
// the split, a stability trial, a tested phase — is evaluated with that
// set, everything else with the mixture's own. The split minimises the
// resulting piecewise Gibbs energy and a stability test compares every
// trial on the set its composition selects, so an aqueous phase is tested
// against its own model; results jump where a phase's water fraction
// crosses 0.5 (only near the water–hydrocarbon critical region), and the
// ln φ of an aqueous phase in a Result are those of the aqueous set, as
// are its properties.
//
// # Phase labels
//
// A phase whose water mole fraction exceeds 0.5 is aqueous. Of the other
// phases the one of largest molar volume is the vapour when it is
// vapour-like by the pseudo-critical volume criterion v/b > Zc/Ωb of the
// model (3.951 for PR, 3.847 for SRK: less dense than the model's critical
// fluid of the same co-volume), otherwise a liquid; all others are
// liquids. Result.Phases lists the vapour, then liquids by decreasing
// molar volume, then the aqueous phase.
//
// # Units
//
// SI: K, Pa, mole fractions (mole numbers are accepted and normalised);
// properties as in package eos.
//
// # Errors
//
// *InputError names the bad argument (T, P, z[i], warm.X[k][i],
// opts.Tolerance, …). *ConvergenceError (errors.Is ErrNotConverged)
// carries the stage, iterations, residual and phase amounts of the best
// estimate, which is also left in the Result. Cancellation is checked in
// every outer iteration: a done context gives an error wrapping ctx.Err(),
// Options.Cancel returning true gives ErrStopped. Nothing panics on user
// input.
//
// # Limits
//
// Results are engineering estimates from published cubic models; near
// critical points, for polar or associating mixtures (glycols and methanol
// with hydrocarbons; water with hydrocarbons and gases beyond the fitted
// range of the aqueous k_ij, or with eos.AqueousKijNone, where hydrocarbon
// solubility in water is orders of magnitude low) and for very heavy
// fractions they can be far from measured behaviour. They are not a basis for the design of
// relief, flare or pressure systems, which belongs to the applicable codes
// and to licensed engineers.
//
// References:
//   - Michelsen, M.L.: The isothermal flash problem. Part I. Stability.
//     Fluid Phase Equilib. 9, 1–19 (1982a).
//   - Michelsen, M.L.: The isothermal flash problem. Part II. Phase-split
//     calculation. Fluid Phase Equilib. 9, 21–40 (1982b).
//   - Michelsen, M.L.: Calculation of multiphase equilibrium. Comput.
//     Chem. Eng. 18(7), 545–550 (1994).
//   - Michelsen, M.L., Mollerup, J.M.: Thermodynamic Models: Fundamentals &
//     Computational Aspects, 2nd ed. Tie-Line Publications (2007), ch. 9–12.
//   - Leibovici, C.F., Neoschil, J.: A new look at the Rachford–Rice
//     equation. Fluid Phase Equilib. 74, 303–308 (1992).
//   - Whitson, C.H., Michelsen, M.L.: The negative flash. Fluid Phase
//     Equilib. 53, 51–71 (1989).
//   - Crowe, A.M., Nishio, M.: Convergence promotion in the simulation of
//     chemical processes — the general dominant eigenvalue method. AIChE J.
//     21(3), 528–533 (1975).
//   - Søreide, I., Whitson, C.H.: Peng–Robinson predictions for
//     hydrocarbons, CO2, N2, and H2S with pure water and NaCl brine.
//     Fluid Phase Equilib. 77, 217–240 (1992).
//   - Wilson, G.M.: A modified Redlich–Kwong equation of state, application
//     to general physical data calculations. AIChE 65th National Meeting,
//     Cleveland, paper 15C (1969).
package flash
