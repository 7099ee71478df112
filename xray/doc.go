// Package xray holds the physics goniod needs, with no I/O: constants, emission-line and crystal tables,
// Bragg and energy conversion, the tube spectrum, counting statistics and dead time. Its subpackage
// xray/analysis does peak search and fits, line identification, lattice and width fits and the
// short-wavelength limit.
//
// Units: angles in degrees at the API, lengths in nm, energies in keV, rates in counts per second.
package xray
