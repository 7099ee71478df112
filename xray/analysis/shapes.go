package analysis

import (
	"fmt"
	"math"
	"strings"
)

// Shape is the line profile a peak is fitted with. Every shape is parameterised by centre, full width at half
// maximum and area, so widths and areas of different shapes compare directly.
type Shape int

// Profiles.
const (
	Gaussian Shape = iota
	Lorentzian
	// PseudoVoigt is η·Lorentzian + (1 − η)·Gaussian with a common FWHM, 0 ≤ η ≤ 1 (Wertheim et al., J.
	// Electron Spectrosc. 4, 453, 1974; Thompson, Cox & Hastings, J. Appl. Cryst. 20, 79, 1987).
	PseudoVoigt
)

func (s Shape) String() string {
	switch s {
	case Lorentzian:
		return "lorentzian"
	case PseudoVoigt:
		return "pseudo-voigt"
	}
	return "gaussian"
}

// ParseShape reads a shape name ("gaussian", "lorentzian", "pseudo-voigt"; empty: Gaussian).
func ParseShape(name string) (Shape, error) {
	switch strings.ReplaceAll(strings.ToLower(strings.TrimSpace(name)), "_", "-") {
	case "", "gaussian", "gauss":
		return Gaussian, nil
	case "lorentzian", "lorentz":
		return Lorentzian, nil
	case "pseudo-voigt", "pseudovoigt", "voigt":
		return PseudoVoigt, nil
	}
	return Gaussian, fmt.Errorf("shape %q: use gaussian, lorentzian or pseudo-voigt", name)
}

// params is the number of profile parameters: centre, FWHM, area (and η for the pseudo-Voigt).
func (s Shape) params() int {
	if s == PseudoVoigt {
		return 4
	}
	return 3
}

// halfWindow is how many FWHM on each side of a peak a fit window reaches: the Lorentzian's wings are wide.
func (s Shape) halfWindow() float64 {
	if s == Gaussian {
		return 3
	}
	return 5
}

const ln2x4 = 4 * math.Ln2

// gaussian is A·√(4ln2/π)/w·exp(−4ln2 (x−c)²/w²); grad gets ∂/∂(c, w, A).
func gaussian(x, c, w, a float64, grad []float64) float64 {
	u := x - c
	g0 := math.Sqrt(ln2x4/math.Pi) / w * math.Exp(-ln2x4*u*u/(w*w))
	f := a * g0
	grad[0] = f * 2 * ln2x4 * u / (w * w)
	grad[1] = f * (-1/w + 2*ln2x4*u*u/(w*w*w))
	grad[2] = g0
	return f
}

// lorentzian is (2A/π)·w/(4(x−c)² + w²); grad gets ∂/∂(c, w, A).
func lorentzian(x, c, w, a float64, grad []float64) float64 {
	u := x - c
	d := 4*u*u + w*w
	l0 := 2 / math.Pi * w / d
	grad[0] = 2 * a / math.Pi * w * 8 * u / (d * d)
	grad[1] = 2 * a / math.Pi * (4*u*u - w*w) / (d * d)
	grad[2] = l0
	return a * l0
}

// profile evaluates the shape with parameters q = (c, w, A[, η]) and writes ∂/∂q into grad.
func (s Shape) profile(x float64, q, grad []float64) float64 {
	switch s {
	case Lorentzian:
		return lorentzian(x, q[0], q[1], q[2], grad)
	case PseudoVoigt:
		var gg, gl [3]float64
		eta := q[3]
		fg := gaussian(x, q[0], q[1], q[2], gg[:])
		fl := lorentzian(x, q[0], q[1], q[2], gl[:])
		for k := range 3 {
			grad[k] = eta*gl[k] + (1-eta)*gg[k]
		}
		grad[3] = fl - fg
		return eta*fl + (1-eta)*fg
	}
	return gaussian(x, q[0], q[1], q[2], grad)
}

// height is the profile's value at its centre.
func (s Shape) height(q []float64) float64 {
	var g [4]float64
	return s.profile(q[0], q, g[:])
}

// areaPerHeightFWHM is area/(height·FWHM) of the shape: √(π/4ln2) for the Gaussian, π/2 for the Lorentzian.
func (s Shape) areaPerHeightFWHM(eta float64) float64 {
	gs, ls := math.Sqrt(math.Pi/ln2x4), math.Pi/2
	switch s {
	case Lorentzian:
		return ls
	case PseudoVoigt:
		// height = A·(η·2/(πw) + (1−η)·√(4ln2/π)/w)
		return 1 / (eta/ls + (1-eta)/gs)
	}
	return gs
}
