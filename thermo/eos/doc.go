// Package eos implements the generalised two-parameter cubic equation of
// state with Peng–Robinson (1976, 1978) and Soave–Redlich–Kwong (1972)
// parameters, van der Waals one-fluid mixing, optional Péneloux volume
// translation, fugacity coefficients with analytic derivatives, and phase
// properties.
//
// # Overview
//
// The equation of state is
//
//	P = RT/(v − b) − a(T)/((v + δ1·b)(v + δ2·b)),
//
// with δ1,2 = 1 ± √2 for Peng–Robinson and δ1 = 1, δ2 = 0 for SRK. Pure
// parameters are a_i = Ωa·R²Tc²/Pc·α_i(T) and b_i = Ωb·R·Tc/Pc with the
// Soave α = [1 + m(ω)(1 − √Tr)]². Ωa and Ωb are solved from the critical
// conditions (PR: Ωa = 0.457236, Ωb = 0.077796, Zc = 0.307401; SRK:
// Ωa = 0.427480, Ωb = 0.086640, Zc = 1/3), so each model reproduces its
// input critical point exactly. Mixing is the van der Waals one-fluid rule
//
//	a = Σ_ij x_i x_j (1 − k_ij(T)) √(a_i a_j),  b = Σ_i x_i b_i,
//	k_ij(T) = k0_ij + k1_ij·T.
//
// A fluid with water also carries a second set of interaction parameters
// for aqueous phases (Peng & Robinson 1980; Søreide & Whitson 1992),
// reached through Mixture.Aqueous; see AqueousKijMode.
//
// A Mixture is compiled once per fluid and is safe for concurrent use; each
// goroutine evaluates states through its own Workspace. Fugacity,
// Properties and the T–V forms allocate nothing.
//
// References:
//   - Peng, D.-Y., Robinson, D.B.: A new two-constant equation of state.
//     Ind. Eng. Chem. Fundam. 15(1), 59–64 (1976).
//   - Robinson, D.B., Peng, D.-Y.: The characterization of the heptanes and
//     heavier fractions for the GPA Peng–Robinson programs. GPA Research
//     Report RR-28 (1978).
//   - Soave, G.: Equilibrium constants from a modified Redlich–Kwong
//     equation of state. Chem. Eng. Sci. 27(6), 1197–1203 (1972).
//   - Péneloux, A., Rauzy, E., Fréze, R.: A consistent correction for
//     Redlich–Kwong–Soave volumes. Fluid Phase Equilib. 8, 7–23 (1982).
//   - Michelsen, M.L., Mollerup, J.M.: Thermodynamic Models: Fundamentals &
//     Computational Aspects, 2nd ed. Tie-Line Publications (2007).
//
// # Units
//
// SI throughout: K, Pa, m³/mol, mol/m³, kg/m³, kg/mol, J/mol, J/(mol·K),
// m/s, K/Pa, 1/Pa. Compositions are mole fractions (mole numbers are
// accepted and normalised). Derivatives with respect to mole numbers are
// for one mole in total.
//
// # Reference state
//
// Enthalpy: each pure component as an ideal gas at 298.15 K has its
// ideal-gas enthalpy of formation from the elements, so reaction and mixing
// balances close. Entropy: each pure component as an ideal gas at 298.15 K
// and 101 325 Pa has S = 0; ideal mixing adds −R·Σ x_i ln x_i. G, U and A
// follow from H and S. With volume translation on, H and G shift by −c·P
// (c = Σ x_i c_i); U, A, S, Cp and Cv do not.
//
// # Invariants
//
//   - A root is never at or below B (v > b always).
//   - Σ x_i ln φ_i = G^r/RT; Σ_i x_i ∂ln φ_i/∂n_j = 0; ∂ln φ_i/∂n_j is
//     symmetric.
//   - Volume translation leaves every fugacity ratio between phases, and so
//     every equilibrium result, unchanged.
//
// # Errors
//
// Bad arguments give *InputError naming the argument and the reason; a
// pure component above its critical temperature has no vapour pressure
// (*SaturationError, matching ErrNoSaturation); an iteration that stalls
// gives *ConvergenceError (ErrNotConverged) with its best estimate. Nothing
// here panics on user input.
package eos
