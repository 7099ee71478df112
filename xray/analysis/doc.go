// Package analysis turns step-scan counts into physics: peak search and least-squares peak fits, emission-line
// identification, the lattice-spacing fit, rocking-curve widths and the Duane–Hunt short-wavelength limit with
// Planck's constant. It is pure (no I/O, no clock, no global state) and works on plain slices.
//
// Units follow package xray: angles in degrees, lengths in nm, energies in keV, rates in counts per second.
// Every uncertainty is one standard deviation.
package analysis
