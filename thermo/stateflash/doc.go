// Package stateflash computes the phase equilibrium of a feed specified by
// a pair of state functions other than temperature and pressure: pressure
// and enthalpy (P–H), pressure and entropy (P–S), temperature and volume
// (T–V), internal energy and volume (U–V), with up to three phases, on
// the cubic equations of state of package eos and the T–P flash of
// package flash.
//
// # Overview
//
// A Workspace (one per goroutine, reused) runs
//
//	ws.PH(ctx, P, H, z, opts, warm, res)
//	ws.PS(ctx, P, S, z, opts, warm, res)
//	ws.TV(ctx, T, V, z, opts, warm, res)
//	ws.UV(ctx, U, V, z, opts, warm, res)
//
// into a Result from NewResult; Result.Estimate hands the converged state
// (T, P and the phase split) back as the warm start of the next call.
// Molar quantities are per mole of feed: H and U in J/mol on the reference
// state of package eos (ideal-gas enthalpy of formation at 298.15 K), S in
// J/(mol·K) (zero for each pure ideal gas at 298.15 K and 101 325 Pa), V in
// m³/mol (translated when the mixture translates volumes).
//
// # Method
//
// The flashes are nested (Michelsen 1987, section 2; Michelsen 1999): an
// outer iteration on the unknown of the T–P pair, an inner T–P flash at
// each iterate, warm-started from the previous inner result so that after
// the first it usually costs a few Newton steps and a stability test. For
// P–H and P–S an inner flash warm-started from a split of two or more
// phases converges that split without its stability test
// (flash.Workspace.Split); the converged outer state is then confirmed by
// a full T–P flash from its own split, and if that flash does not return
// the same split (the path was metastable) the outer iteration is rerun
// with every inner flash tested, so the shortcut never changes the answer.
// A metastable path is also caught inside the outer iteration: when the
// bracket between an untested end and the other holds a jump (end values
// further apart than four times the larger end derivative allows over the
// bracket's width), the untested ends are dropped for the last tested
// ones and every later inner flash is tested. Without that, the bracket collapsed between a metastable
// two-phase split and the stable three-phase state, and the call failed.
//
// Single-phase shortcut. The single-phase equation of state is solved for
// the specification first — h(T, P) = H by Newton with Cp, s(T, P) = S
// with Cp/T, P = P(T, V) directly, u(T, V) = U by Newton with Cv — and one
// T–P flash at the result decides: a stable single phase with the same
// value ends the call (Route RouteSinglePhase).
//
// Outer iteration. Otherwise the outer unknown is T (P–H, P–S) or ln P
// (T–V), solving one increasing equation
//
//	H(T) − H_spec = 0,  S(T) − S_spec = 0,  ln V_spec − ln V(ln P) = 0
//
// by Newton's method with the exact derivative of the equilibrium state,
// kept inside a bracket: a step leaving the bracket, or two steps that
// fail to halve the residual, or a residual that has not halved in two
// steps (Newton steps alternating across a kink of F), are replaced by a
// secant step between the bracket ends (kept off them) or a bisection.
// An inner flash that fails at a trial point bounds the search there and
// the next trial is halfway back to the last point evaluated (at most
// eight times); the model has states, far below the normal freezing points,
// where the T–P flash does not converge, and a long first step can land
// there. H(T) at fixed P and V(P) at
// fixed T are monotone (thermal and mechanical stability), so the bracket
// always holds the solution, including where the derivative is huge or
// jumps at a phase boundary, as for narrow-boiling mixtures. U–V uses
// Newton on (ln T, ln P),
//
//	J·(Δln T, Δln P) = −((U − U_spec)/RT, (V − V_spec)/V_spec),
//
// with step limits and halving, and falls back to a bracketed Newton on T
// of U(T, V_spec) − U_spec = 0 with an inner T–V flash and the total
// isochoric heat capacity (U increases with T at fixed V).
//
// Derivatives of the equilibrium state. With one phase they are the
// phase's Cp, (∂P/∂T)_v and (∂P/∂v)_T. With m phases, differentiating
// fugacity equality gives the change of the phase amounts (Michelsen &
// Mollerup 2007, ch. 11),
//
//	Σ_l (δ_kl M_k + M_0)·dn_l/dθ = −(∂ln φ_k/∂θ − ∂ln φ_0/∂θ),
//	M_k,ij = (δ_ij/x_ik − 1 + ∂ln φ_ik/∂n_j)/β_k,  θ = T or P,
//
// and then, for example, the total heat capacity including the heat of
// phase change,
//
//	C_p,total = Σ_k β_k C_p,k − RT² Σ_{k≥1} Σ_i (∂ln φ_ik/∂T − ∂ln φ_i0/∂T)·dn_ik/dT,
//
// with (∂S/∂T)_P = C_p,total/T. The system is symmetric positive definite
// at a stable equilibrium and is solved by Cholesky; where it is not (a
// near-singular split) the outer iteration uses secant and bisection
// steps. For two phases the inner T–P flash has solved the same system
// with the Hessian factor of its Newton method and hands the result on
// (flash.Result.Derivatives), together with the sensitivities of its
// K-values, which shift the warm start of the next inner flash to the new
// temperature to first order.
//
// A warm start of P–H or P–S from a result of two or more phases begins
// at the temperature of the first-order step from the estimate's state,
// with its enthalpy (entropy) and state derivatives (Estimate.H,
// Estimate.Deriv), which saves the inner flash at the estimate's own
// temperature; where the confirming flash takes no Newton step, the final
// result keeps the derivatives of the split it confirmed, so the next
// call can take the same step.
//
// The single-phase seed stops one Newton step short: from a scaled
// residual below 1e-5 the step is taken unevaluated and the T–P flash
// that follows checks the specification. It stops earlier where Wilson's
// K-values put the next temperature inside the two-phase region, unless
// the residual predicted after that step (from the quadratic convergence
// of Newton's method) shows that one more evaluation ends the solve, and
// where repeated bisection shows that h(T) of the single phase jumps (the
// root of lowest Gibbs energy switching between vapour and liquid). A
// flash that then finds one phase hands its phase's properties back to
// the single-phase solve, which finishes without stopping early.
//
// Pure components. With a single component present, the two-phase region
// sits at one temperature for a given pressure (P–H, P–S: Tsat(P)) or one
// pressure for a given temperature (T–V: Psat(T)), and the state functions
// jump across it. Below the critical point the saturated liquid and
// vapour (eos.SaturationTemperature, eos.VapourPressure) decide: a
// specification X between X_L and X_V is the two-phase state with the
// lever rule β = (X − X_L)/(X_V − X_L) (Route RouteSaturation); otherwise
// the single phase is solved on its own side of Tsat. U–V solves
//
//	U_L(T) + β(T)(U_V(T) − U_L(T)) = U_spec,  β(T) = (V − V_L(T))/(V_V(T) − V_L(T)),
//
// by bracketed secant/bisection on T when V lies inside the saturation
// dome at the temperature of the single-phase solution.
//
// # Tolerances
//
// Converged means |H − H_spec| ≤ tol·RT (U likewise), |S − S_spec| ≤ tol·R,
// |ln V − ln V_spec| ≤ tol, with tol = Options.Tolerance (default 1e-10),
// and every inner flash converged to its own tolerance with a stable
// result. With Cp ≈ 40 J/(mol·K) the default fixes T to about 1e-8 K.
//
// # Errors
//
// Bad arguments give *InputError naming the field; a specification that no
// state between the search bounds reaches gives *RangeError
// (ErrOutOfRange) with the value at the bound; an outer or inner iteration
// that stops short gives *ConvergenceError (ErrNotConverged) with the best
// estimate, its residual and the inner cause; cancellation gives the
// context's error, wrapped. Nothing here panics on user input, and the
// flashes allocate nothing once the Workspace and Result exist.
//
// # Limits
//
// A mixture whose three-phase region collapses to one temperature at fixed
// pressure (a binary in three-phase equilibrium, by the phase rule) has an
// enthalpy jump there that the nested iteration does not split by a lever
// rule; it reports a *ConvergenceError whose stage says the bracket
// collapsed. Results are engineering estimates from cubic equations of
// state; they do not replace the judgement of a qualified engineer or the
// codes that govern the design of pressure and relief systems.
//
// References:
//   - Michelsen, M.L.: Multiphase isenthalpic and isentropic flash
//     algorithms. Fluid Phase Equilib. 33, 13–27 (1987).
//   - Michelsen, M.L.: State function based flash specifications. Fluid
//     Phase Equilib. 158–160, 617–626 (1999).
//   - Michelsen, M.L., Mollerup, J.M.: Thermodynamic Models: Fundamentals &
//     Computational Aspects, 2nd ed. Tie-Line Publications (2007).
package stateflash
