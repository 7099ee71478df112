package analysis

import (
	"math"
	"math/rand/v2"
	"testing"
)

// Reference values for checks, written out here so that the tests do not lean on the tables they check.
const (
	// CODATA 2018: hc = 1.239 841 984 keV·nm.
	refHC = 1.239841984
	// NIST SRD 128 (Deslattes et al., Rev. Mod. Phys. 75, 35, 2003), direct experimental values, keV.
	refCuKa1, refCuKa2, refCuKb1 = 8.0478227, 8.0278416, 8.905413
	refMoKa1, refMoKa2, refMoKb1 = 17.479372, 17.37429, 19.60834
	// Wyckoff, Crystal Structures (1965), as carried by xraylib: LiF a = 0.402630 nm, d(200) = a/2;
	// NaCl a = 0.563978 nm.
	refLiF200, refNaCl200 = 0.402630 / 2, 0.563978 / 2
)

// braggDeg is nλ = 2d sin θ solved for θ, from the reference constants.
func braggDeg(keV, d float64, n int) float64 {
	return math.Asin(float64(n)*refHC/keV/(2*d)) * 180 / math.Pi
}

// synthLine is one line of a synthetic scan: Gaussian in θ with the given FWHM and area (cps·degree).
type synthLine struct {
	centre, fwhm, area float64
}

// synth describes a synthetic step scan with known truth.
type synth struct {
	from, to, step, dwell float64
	// Background: bg0 + bg1·(θ − from), cps.
	bg0, bg1 float64
	lines    []synthLine
	shape    Shape
	eta      float64
}

// rate is the true rate at θ.
func (sy synth) rate(x float64) float64 {
	r := sy.bg0 + sy.bg1*(x-sy.from)
	var g [4]float64
	for _, l := range sy.lines {
		q := []float64{l.centre, l.fwhm, l.area, sy.eta}
		r += sy.shape.profile(x, q, g[:])
	}
	return r
}

// scan makes the scan: with rng nil the counts are the expected values (noise-free), else Poisson draws.
func (sy synth) scan(t testing.TB, rng *rand.Rand) *Scan {
	t.Helper()
	n := int(math.Round((sy.to-sy.from)/sy.step)) + 1
	x, c, d := make([]float64, n), make([]float64, n), make([]float64, n)
	for i := range n {
		x[i] = sy.from + float64(i)*sy.step
		d[i] = sy.dwell
		mu := sy.rate(x[i]) * sy.dwell
		if rng != nil {
			c[i] = poisson(rng, mu)
		} else {
			c[i] = mu
		}
	}
	s, err := NewScan(x, c, d, DeadTime{})
	if err != nil {
		t.Fatal(err)
	}
	return s
}

// poisson draws a Poisson variate: Knuth's product method for small means, a rounded normal above 500
// (Knuth, TAOCP vol. 2, 3.4.1).
func poisson(rng *rand.Rand, mu float64) float64 {
	if mu <= 0 {
		return 0
	}
	if mu > 500 {
		return math.Max(0, math.Round(mu+math.Sqrt(mu)*rng.NormFloat64()))
	}
	l, k, p := math.Exp(-mu), 0.0, 1.0
	for {
		p *= rng.Float64()
		if p <= l {
			return k
		}
		k++
	}
}

// cuOnLiF is the demo scenario's coupled scan: Cu Kα1, Kα2 and Kβ1 in orders 1 and 2 on LiF(200), 0.08° wide,
// intensities in the ratios of the NIST lines' relative rates (Kα2/Kα1 = 0.513, Kβ/Kα = 0.134, Scofield via
// Krause, ORNL-5399, 1978), second order a quarter of the first, on a sloping background.
func cuOnLiF(from, to, step float64) synth {
	sy := synth{from: from, to: to, step: step, dwell: 1, bg0: 20, bg1: -0.2}
	const a1, fwhm = 300.0, 0.08
	for n, scale := range map[int]float64{1: 1, 2: 0.25} {
		for _, l := range []struct{ keV, rel float64 }{{refCuKa1, 1}, {refCuKa2, 0.513}, {refCuKb1, 0.134 * 1.513}} {
			c := braggDeg(l.keV, refLiF200, n)
			if c > from && c < to {
				sy.lines = append(sy.lines, synthLine{centre: c, fwhm: fwhm, area: a1 * l.rel * scale})
			}
		}
	}
	return sy
}

// continuum is a thick-target continuum seen through the crystal in first order: Kramers' law in Ebel's form
// dN/dE ∝ (E0/E − 1)^x, x = 1.109 − 0.00435 Z + 0.00175 E0 (Ebel, X-Ray Spectrometry 28, 255, 1999), times
// |dE/dθ| = E cot θ for the band a crystal angle accepts, for Cu (Z = 29).
type continuum struct {
	kv, d, scale, bg float64
}

func (c continuum) rate(th float64) float64 {
	lam := 2 * c.d * math.Sin(th*math.Pi/180)
	e := refHC / lam
	if e >= c.kv {
		return c.bg
	}
	x := 1.109 - 0.00435*29 + 0.00175*c.kv
	return c.bg + c.scale*math.Pow(c.kv/e-1, x)*e/math.Tan(th*math.Pi/180)
}

func (c continuum) scan(t testing.TB, from, to, step float64, rng *rand.Rand) *Scan {
	t.Helper()
	n := int(math.Round((to-from)/step)) + 1
	x, cn, d := make([]float64, n), make([]float64, n), make([]float64, n)
	for i := range n {
		x[i], d[i] = from+float64(i)*step, 1
		cn[i] = c.rate(x[i])
		if rng != nil {
			cn[i] = poisson(rng, cn[i])
		}
	}
	s, err := NewScan(x, cn, d, DeadTime{})
	if err != nil {
		t.Fatal(err)
	}
	return s
}
