// Package component holds pure-component constants for the equations of
// state — critical properties, acentric factors, ideal-gas heat capacities
// and enthalpies of formation, each with its source — plus user-defined
// components, petroleum pseudo-components and default binary interaction
// parameters.
//
// # Overview
//
// The library of pure components is an embedded table (data/components.txt)
// parsed and validated once at start-up. Lookup finds a component by ID
// ("n-butane"), alias ("nC4"), formula ("CH4", when no isomer shares it) or
// CAS number ("106-97-8"), ignoring case and surrounding blanks; All lists
// the library. Define builds a component from user constants;
// PseudoFromBoilingPoint and PseudoFromMolarMass estimate a petroleum
// fraction from (Tb, SG) or (M, SG) with the Kesler–Lee (1976) and
// Riazi–Daubert (1987) correlations. DefaultKij returns the default k_ij of
// a pair for the PR or SRK family from a second embedded table
// (data/kij.txt). DataVersion names the edition of both tables.
//
// The library covers N2, O2, Ar, He, H2, CO, CO2, H2S, water, methanol,
// monoethylene glycol, the n-alkanes C1–C12, the branched C4–C6 alkanes,
// cyclopentane, cyclohexane, methylcyclohexane, benzene, toluene,
// ethylbenzene, the xylenes, ethylene and propylene.
//
// Helium and hydrogen carry their plain critical constants. Quantum gases
// are poorly described by cubic equations of state with these constants
// (effective, temperature-dependent critical constants are the usual
// remedy); results for mixtures rich in them are rough estimates.
//
// # Units
//
// In memory everything is SI: K, Pa, kg/mol, m³/mol, J/mol, J/(mol·K). The
// data file uses g/mol, bar, cm³/mol and kJ/mol, stated on its "units"
// line; the parser converts and refuses any other units line. Ideal-gas Cp
// is stored as Cp°/R = a0 + a1·T + a2·T² + a3·T³ + a4·T⁴ (T in K), the form
// of Poling, Prausnitz & O'Connell (2001), Appendix A.
//
// # Data sources
//
// Each row names its sources (Component.Source for the constants,
// Component.CpSource for Cp) and Component.Recalled is true when a value was
// written down from memory of the source rather than read from a copy.
// In this edition every row of both tables is recalled. The main sources:
//
//   - Poling, B. E.; Prausnitz, J. M.; O'Connell, J. P., The Properties of
//     Gases and Liquids, 5th ed., McGraw-Hill, 2001, Appendix A (constants
//     and most Cp coefficients);
//   - Wagner & Pruß (2002), J. Phys. Chem. Ref. Data 31:387 (water's
//     critical point); DIPPR 801 (monoethylene glycol);
//   - Spencer & Danner (1972), J. Chem. Eng. Data 17:236 (Rackett Z_RA),
//     GPA Standard 2145 (liquid specific gravities);
//   - Benson, Thermochemical Kinetics, 2nd ed., Wiley, 1976: group-additivity
//     Cp at 300–1000 K, fitted with a cubic in T, for components whose
//     Poling coefficients were not at hand (branched alkanes, n-C9 to n-C12,
//     ethylbenzene, xylenes, MEG, and methylcyclohexane as an increment on
//     cyclohexane);
//   - interaction parameters: Knapp et al. (1982), DECHEMA Chemistry Data
//     Series VI; Nishiumi, Arai & Takeuchi (1988), Fluid Phase Equilib.
//     42:43; Peng & Robinson (1980), ACS Symp. Ser. 133 (water pairs;
//     series number from memory).
//
// The Kesler–Lee Cp reproduces n-alkanes within about 2.5 % and
// aromatics within about 6 % over 300–900 K, but naphthenes only within
// 8–17 % (cyclohexane), so user components of naphthenic character should
// be given Cp coefficients.
//
// CO2 has no normal boiling point; its Tb is the sublimation temperature at
// 101 325 Pa (194.67 K).
//
// # Reference state of Hf and the Cp integrals
//
// Component.HIG(T) = Hf + ∫_{298.15 K}^{T} Cp° dT, so the ideal gas at
// 298.15 K has the standard enthalpy of formation from the elements in
// their reference states, and enthalpy balances over reacting and
// non-reacting streams close. Component.SIG(T) = ∫_{298.15 K}^{T} Cp°/T dT
// is the ideal-gas entropy at PRef = 101 325 Pa relative to the same gas at
// 298.15 K and PRef (the pressure and mixing terms belong to the equation of
// state). Both integrals are evaluated analytically from the polynomial.
// Outside [Cp.Tmin, Cp.Tmax] the polynomial is extrapolated; IdealGasCp.InRange
// tells callers when.
//
// Pseudo-components and user components without Hf have Hf = 0: their
// enthalpies are consistent for phase and energy balances without
// reaction.
//
// # Adding a component
//
// Add one row to the "constants" section and one to the "cp" section of
// data/components.txt (columns are named in the file's comments; "-" marks
// an unknown optional value; aliases are separated by ';'; cite sources by key, defining new keys on a
// "source" line; mark the row "recalled" unless every value was read from
// the cited document). Then change DataVersion and the version line, and
// record the new digest in the test that ties them together. The tests
// check the new row's formula against its molar mass, its CAS check digit,
// Tb < Tc, sanity bounds of Tc, Pc and ω, a positive Cp over its range, and
// that none of its names clash with another component's.
//
// The interaction-parameter file has rows
//
//	models | component a | component b | k0 | k1 (1/K) | source keys | recalled|read
//
// with models "PR", "SRK" or "PR,SRK"; each pair at most once per model.
//
// # Errors
//
// Caller mistakes return typed errors and never panic:
//   - *UnknownError: no component has that name; Suggestions lists up to
//     five close IDs (edit distance or prefix), closest first;
//   - *AmbiguousError: a formula shared by isomers (e.g. "C8H10");
//   - *InputError: a Definition or pseudo-component input that is not
//     finite, out of range, or an unphysical combination, naming the field
//     and the reason.
//
// *ParseError reports a malformed line of an embedded table, with its line
// number and column. The embedded tables are part of the program, so a
// parse failure at initialisation is a defect and panics; the package tests
// parse both tables and exercise the parser on malformed rows.
//
// Results built on these data are engineering estimates from published
// correlations with known limits. They do not replace the applicable codes
// or a licensed engineer's review for the design of pressure, relief or
// flare systems.
package component
