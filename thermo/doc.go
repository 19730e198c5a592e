// Package thermo is the root of fugad's science: component data
// (thermo/component), cubic equations of state (thermo/eos), and the
// equilibrium solvers built on them. It is plain Go with no transport or
// observability dependencies, usable as a library on its own.
package thermo
