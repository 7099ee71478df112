package sim

import (
	"math"

	"goniod/xray"
)

// model computes the expected (true, before dead time) count rate at a geometry. It is a pure function of
// the tube setting and the true angles of both axes.
type model struct {
	anode   xray.Anode
	dNM     float64
	mosaicS float64 // Gaussian σ of the mosaic, degrees
	slit    float64 // full width of the detector acceptance in 2θ, degrees
	bg      float64 // background, cps
}

// Scale factors that bring the tube's photon output to count rates of a benchtop unit with a Geiger–Müller
// counter behind an analyzer crystal: a few thousand counts per second in first-order Cu Kα at 30 kV, 1 mA.
// They are the simulator's calibration, not physics.
const (
	lineScale      = 1.3e4 // cps per mA at (U/U_K − 1)^1.67 = 1, before reflectivity
	continuumScale = 3.2e-7
	directBeamCPS  = 4.0e3 // attenuated direct beam at 2θ = 0 per mA at 30 kV
	maxOrder       = 5
)

// reflectivity of order n relative to first order: falls off with order (Debye–Waller and structure factor);
// the 1/n² shape is a simple choice of the simulator (from memory for typical LiF behaviour).
func reflectivity(n int) float64 { return 1 / float64(n*n) }

func gauss(x, sigma float64) float64 { return math.Exp(-0.5 * x * x / (sigma * sigma)) }

// acceptance of the detector slit: flat top of the slit width with soft Gaussian edges.
func (m model) acceptance(d2theta float64) float64 {
	half := m.slit / 2
	a := math.Abs(d2theta)
	if a <= half {
		return 1
	}
	return gauss(a-half, m.slit/8)
}

// rate is the true count rate at true angles theta, twoTheta (degrees) with the tube at kV, mA and high
// voltage on or off.
func (m model) rate(theta, twoTheta, kV, mA float64, hv bool) float64 {
	r := m.bg
	if !hv || mA <= 0 || kV <= 0 {
		return r
	}
	// Direct beam through the detector near 2θ = 0.
	r += directBeamCPS * mA * (kV / 30) * (kV / 30) * m.acceptance(twoTheta)
	for n := 1; n <= maxOrder; n++ {
		rn := reflectivity(n)
		for _, l := range m.anode.Lines {
			ex := xray.LineExcitation(kV, l.EdgeKeV)
			if ex == 0 {
				continue
			}
			tb, ok := xray.BraggAngleDeg(l.WavelengthNM(), m.dNM, n)
			if !ok {
				continue
			}
			r += lineScale * mA * ex * l.Relative * rn * gauss(theta-tb, m.mosaicS) * m.acceptance(twoTheta-2*tb)
		}
		// Continuum: the crystal at θ reflects in order n the energy whose Bragg angle is θ, from a band set by
		// the mosaic: ∫S(E) G(θ − θB(E)) dE ≈ S(E(θ)) |dE/dθ| σ√(2π).
		if theta <= 0 || theta >= 90 {
			continue
		}
		lambda := xray.WavelengthNM(theta, m.dNM, n)
		e := xray.EnergyKeV(lambda)
		s := xray.KramersContinuum(m.anode.Z, kV, e)
		if s == 0 {
			continue
		}
		dEdTheta := e / math.Tan(xray.Radians(theta)) * math.Pi / 180 // |dE/dθ| per degree
		r += continuumScale * mA * rn * s * dEdTheta * m.mosaicS * math.Sqrt(2*math.Pi) * m.acceptance(twoTheta-2*theta)
	}
	return r
}
