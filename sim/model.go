package sim

import (
	"math"

	"goniod/xray"
)

// model computes the expected (true, before dead time) count rate at a geometry. It is a pure function of the
// tube output and the true angles of both axes.
//
// Geometry: a ray leaves the collimator at angle α to the beam axis (Gaussian, divergence σd); a mosaic block
// of the crystal is tilted by δ (Gaussian, mosaic σm). With the crystal at θ, the block reflects wavelength λ
// in order n when θ + δ − α = θB(λ, n), and the ray leaves at α + 2θB; the detector at 2θ takes it when
// |α + 2θB − 2θ| ≤ w/2 (slit width w). Integrating over α and δ gives a Gaussian of θ − θB with
// σc² = σm² + σd² times the slit's share of the rays, both in closed form (see reflected).
type model struct {
	anode   xray.Anode
	crystal xray.Crystal
	spec    specimen
	sm, sd  float64 // σ of mosaic and divergence, degrees
	sc      float64 // √(σm² + σd²)
	slit    float64 // full width of the detector acceptance in 2θ, degrees
	bg      float64 // background, cps
	scale   float64 // intensity scale of the unit (1: the calibrated benchtop unit)
}

// fwhmToSigma converts a Gaussian's full width at half maximum to its standard deviation.
const fwhmToSigma = 0.42466090014400953 // 1/(2√(2 ln 2))

func newModel(anode xray.Anode, crystal xray.Crystal, spec specimen, mosaicFWHM, divergenceFWHM, slit, bg, scale float64) model {
	sm, sd := mosaicFWHM*fwhmToSigma, divergenceFWHM*fwhmToSigma
	return model{anode: anode, crystal: crystal, spec: spec, sm: sm, sd: sd, sc: math.Hypot(sm, sd),
		slit: slit, bg: bg, scale: scale}
}

// Calibration of the simulated unit: a collimated benchtop spectrometer with a Geiger–Müller counter. They are
// the simulator's choice, set so that at 30 kV, 1 mA on Cu with LiF(200) and the default geometry the
// first-order Kα peak is about 2,500 counts/s true (2,000 observed with 100 µs dead time, a 20 % loss), the
// continuum peaks near 100 counts/s (at θ ≈ 13°), and the attenuated direct beam is about 2,000 counts/s.
const (
	// geometrySr: the beam's effective solid angle times the detector's share, steradian.
	geometrySr = 1.44e-9
	// lineYield: characteristic photons per second, steradian and mA for one photon per vacancy, a two-electron
	// shell and unit overvoltage factor (U/U_edge − 1)^n. It sets the lines against Ebel's continuum.
	lineYield = 1.6e11
	// directBeamCPS: the attenuated direct beam at 30 kV, 1 mA, slit centred.
	directBeamCPS = 2000
	// lowestTheta: below this Bragg angle (degrees) the crystal reflects nothing (it is edge-on to the beam).
	lowestTheta = 0.5
)

// detectorEfficiency of the Geiger–Müller counter at photon energy e (keV): transmission of its window and the
// air path times absorption in its gas. Photoabsorption is taken ∝ E^−2.8 (common practice: roughly E^−3 away
// from edges), with e-folding energies of 3 keV for the window and 12 keV for the gas (simulator's choice for
// a mica end-window tube).
func detectorEfficiency(e float64) float64 {
	const window, gas, power = 3.0, 15.0, 2.8
	if e <= 0 {
		return 0
	}
	return math.Exp(-math.Pow(window/e, power)) * -math.Expm1(-math.Pow(gas/e, power))
}

// lorentzPolarization is the angle factor of a thick mosaic crystal's integrated reflectivity,
// (1 + cos²2θ)/(2 sin 2θ) (James, The Optical Principles of the Diffraction of X-rays, 1948; from memory). The
// λ³ of the kinematic reflectivity cancels against absorption, which also grows roughly as λ³.
func lorentzPolarization(thetaDeg float64) float64 {
	c := math.Cos(xray.Radians(2 * thetaDeg))
	return (1 + c*c) / (2 * math.Sin(xray.Radians(2*thetaDeg)))
}

// reflectivity is the integrated reflectivity (relative units) of order n at Bragg angle theta.
func (m model) reflectivity(n int, thetaDeg float64) float64 {
	if thetaDeg < lowestTheta || thetaDeg > 89 || !m.crystal.OrderAllowed(n) {
		return 0
	}
	return m.spec.reflectivity * m.spec.order(n) * lorentzPolarization(thetaDeg)
}

// phi is the standard normal distribution function.
func phi(x float64) float64 { return 0.5 * math.Erfc(-x/math.Sqrt2) }

// reflected is the angular factor for a reflection at Bragg angle tB with the crystal at theta and the
// detector at twoTheta, per degree of tB: the Gaussian of theta − tB (σc) times the fraction of the
// reflected rays the slit takes. Given reflection, α is Gaussian with mean Δ·σd²/σc² and σ = σd·σm/σc.
func (m model) reflected(theta, twoTheta, tB float64) float64 {
	d := theta - tB
	g := math.Exp(-0.5*d*d/(m.sc*m.sc)) / (m.sc * math.Sqrt(2*math.Pi))
	if g < 1e-300 {
		return 0
	}
	mean := d * m.sd * m.sd / (m.sc * m.sc)
	sigma := m.sd * m.sm / m.sc
	off := twoTheta - 2*tB
	return g * (phi((off+m.slit/2-mean)/sigma) - phi((off-m.slit/2-mean)/sigma))
}

// directBeam is the attenuated direct beam at detector angle twoTheta: the divergent beam through the slit.
func (m model) directBeam(twoTheta, kV, mA float64) float64 {
	// Total tube output grows as i·U² (Kramers' law integrated over energy; Kramers, Phil. Mag. 46, 836, 1923).
	u := kV / 30
	return directBeamCPS * mA * u * u * (phi((twoTheta+m.slit/2)/m.sd) - phi((twoTheta-m.slit/2)/m.sd))
}

// rateMemo remembers the model's rate at one geometry and tube output. The model is a pure function of them,
// so a count at the same place and setting, as every point of a timed scan is, need not evaluate it again.
type rateMemo struct {
	theta, twoTheta, kV, mA, rate float64
	ok                            bool
}

// rateLocked is model.rate through the memo; in.mu must be held.
func (in *Instrument) rateLocked(theta, twoTheta, kV, mA float64) float64 {
	m := &in.lastRate
	if !m.ok || m.theta != theta || m.twoTheta != twoTheta || m.kV != kV || m.mA != mA {
		*m = rateMemo{theta: theta, twoTheta: twoTheta, kV: kV, mA: mA, rate: in.model.rate(theta, twoTheta, kV, mA), ok: true}
	}
	return m.rate
}

// maxOrder is the highest diffraction order the model follows.
const maxOrder = 6

// rate is the true count rate at true angles theta, twoTheta (degrees) with the tube delivering kV and mA
// (both 0 when high voltage is off).
func (m model) rate(theta, twoTheta, kV, mA float64) float64 {
	if kV <= 0 || mA <= 0 {
		return m.bg
	}
	r := m.directBeam(twoTheta, kV, mA)
	for n := 1; n <= maxOrder; n++ {
		r += m.lines(n, theta, twoTheta, kV) + m.continuum(n, theta, twoTheta, kV)
	}
	return m.bg + m.scale*mA*r
}

// lines is the characteristic lines' rate per mA in order n.
func (m model) lines(n int, theta, twoTheta, kV float64) float64 {
	var r float64
	for _, l := range m.anode.ExcitedLines(kV) {
		tB, ok := xray.BraggAngleDeg(l.WavelengthNM(), m.crystal.DNM, n)
		if !ok || math.Abs(tB-theta) > 8*m.sc {
			continue
		}
		photons := lineYield * float64(l.ShellElectrons()) / 2 * l.PerVacancy * xray.LineExcitation(kV, l.EdgeKeV)
		r += geometrySr * photons * m.reflectivity(n, tB) * detectorEfficiency(l.EnergyKeV) * m.reflected(theta, twoTheta, tB)
	}
	return r
}

// continuumSteps is the number of intervals of the Simpson rule over ±6σc around theta.
const continuumSteps = 48

// continuum is the bremsstrahlung rate per mA in order n: the integral over Bragg angle t of the spectrum
// reflected at t, S(E(t))·|dE/dt|·R(n, t)·ε(E), weighted by the angular factor.
func (m model) continuum(n int, theta, twoTheta, kV float64) float64 {
	lo, hi := math.Max(theta-6*m.sc, lowestTheta), math.Min(theta+6*m.sc, 89)
	if hi <= lo {
		return 0
	}
	// Order n at angle t reflects E = n·hc/(2d sin t); nothing above E0 = eU, so the lowest angle is set by kV.
	if e := float64(n) * xray.EnergyKeV(xray.WavelengthNM(hi, m.crystal.DNM, 1)); e >= kV || m.spec.order(n) == 0 {
		return 0
	}
	h := (hi - lo) / continuumSteps
	var sum float64
	for i := 0; i <= continuumSteps; i++ {
		t := lo + float64(i)*h
		w := 2.0
		switch {
		case i == 0 || i == continuumSteps:
			w = 1
		case i%2 == 1:
			w = 4
		}
		sum += w * m.continuumAt(n, t, theta, twoTheta, kV)
	}
	return sum * h / 3
}

func (m model) continuumAt(n int, t, theta, twoTheta, kV float64) float64 {
	e := float64(n) * xray.EnergyKeV(xray.WavelengthNM(t, m.crystal.DNM, 1))
	s := xray.KramersContinuum(m.anode.Z, kV, e)
	if s == 0 {
		return 0
	}
	dEdt := e / math.Tan(xray.Radians(t)) * math.Pi / 180 // keV per degree
	return geometrySr * s * dEdt * m.reflectivity(n, t) * detectorEfficiency(e) * m.reflected(theta, twoTheta, t)
}
