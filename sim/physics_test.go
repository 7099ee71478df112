package sim

import (
	"fmt"
	"math"
	"testing"
	"time"

	"goniod/xray"
)

func TestShortWavelengthLimit(t *testing.T) {
	// Duane–Hunt: λmin = hc/(eU) (physics reference, CODATA 2018 hc). Method (common practice): fit a straight
	// line to the rising edge of the continuum (10 %–40 % of its maximum) in a coupled scan and extrapolate it
	// to zero; such determinations agree with Duane–Hunt to a few percent, we ask 2 %.
	lif, _ := xray.LookupCrystal("LiF")
	for _, kV := range []float64{15, 20, 25, 30} {
		t.Run(fmt.Sprintf("%gkV", kV), func(t *testing.T) {
			b := newBench(t, Config{Seed: 7}, kV, 1)
			var lambda, rate []float64
			for th := 3.0; th <= 19.0; th += 0.05 {
				lambda = append(lambda, xray.WavelengthNM(th, lif.DNM, 1))
				rate = append(rate, b.rateAt(th, 2*th, 10*time.Second)-b.in.cfg.BackgroundCPS)
			}
			top := 0.0
			for _, r := range rate {
				top = math.Max(top, r)
			}
			var sx, sy, sxx, sxy, n float64
			for i, r := range rate {
				if r > 0.4*top {
					break
				}
				if r >= 0.1*top {
					sx, sy, sxx, sxy, n = sx+lambda[i], sy+r, sxx+lambda[i]*lambda[i], sxy+lambda[i]*r, n+1
				}
			}
			if n < 5 {
				t.Fatalf("only %g points on the rising edge", n)
			}
			slope := (n*sxy - sx*sy) / (n*sxx - sx*sx)
			got := -(sy - slope*sx) / n / slope
			want := xray.DuaneHuntNM(kV)
			t.Logf("%g kV: λmin %.5f nm from %g points, Duane–Hunt %.5f nm (%+.2f %%)", kV, got, n, want, 100*(got/want-1))
			if math.Abs(got/want-1) > 0.02 {
				t.Errorf("%g kV: short-wavelength limit %.5f nm, Duane–Hunt %.5f nm", kV, got, want)
			}
		})
	}
}

func TestNoLineBelowExcitation(t *testing.T) {
	// A characteristic line appears only when eU exceeds its edge (NIST SRD 128 edges: Cu K 8.980 keV,
	// Mo K 20.000 keV). The rate at the line's angle is compared with the straight line through the rates
	// 0.5° either side.
	for _, c := range []struct {
		anode        string
		below, above float64
		gate         time.Duration
	}{
		{"Cu", 8.9, 10, 200 * time.Second},
		{"Mo", 19.5, 22, 20 * time.Second},
	} {
		th := braggDeg(t, c.anode, "Kα1", "LiF", 1)
		for _, kV := range []float64{c.below, c.above} {
			b := newBench(t, Config{Anode: c.anode, Seed: 3}, kV, 1)
			g := c.gate.Seconds()
			at := b.rateAt(th, 2*th, c.gate)
			side := (b.rateAt(th-0.5, 2*th-1, c.gate) + b.rateAt(th+0.5, 2*th+1, c.gate)) / 2
			excess := at - side
			sigma := math.Sqrt(at/g + side/(2*g))
			t.Logf("%s %g kV at Kα1 (θ %.3f°): %.2f cps, sides %.2f cps, excess %.1fσ", c.anode, kV, th, at, side, excess/sigma)
			if kV < c.below+1e-9 && math.Abs(excess) > 4*sigma {
				t.Errorf("%s at %g kV, below the K edge: excess %.2f ± %.2f cps at Kα1", c.anode, kV, excess, sigma)
			}
			if kV > c.above-1e-9 && excess < 10*sigma {
				t.Errorf("%s at %g kV, above the K edge: Kα1 excess only %.2f ± %.2f cps", c.anode, kV, excess, sigma)
			}
		}
	}
}

func TestCountsProportionalToCurrent(t *testing.T) {
	// Tube output is proportional to the current (Kramers' law; overvoltage law for lines, physics reference):
	// dead-time-corrected, background-free rates per mA agree within 4σ (Poisson) at the Kα peak and in the
	// continuum.
	ka := braggDeg(t, "Cu", "Kα1", "LiF", 1)
	for _, th := range []float64{ka, 13} {
		var perMA []float64
		var sigmas []float64
		for _, mA := range []float64{0.2, 0.4, 0.6, 0.8, 1.0} {
			b := newBench(t, Config{Seed: 11}, 30, mA)
			const gate = 20 * time.Second
			obs := b.rateAt(th, 2*th, gate)
			r := b.corrected(obs) - b.in.cfg.BackgroundCPS
			// σ of the corrected rate: Poisson σ of the observed rate times dn/dm = (n/m)².
			s := math.Sqrt(obs/gate.Seconds()) * (r / obs) * (r / obs)
			perMA, sigmas = append(perMA, r/mA), append(sigmas, s/mA)
		}
		for i := 1; i < len(perMA); i++ {
			if d := perMA[i] - perMA[0]; math.Abs(d) > 4*math.Hypot(sigmas[i], sigmas[0]) {
				t.Errorf("θ %.3f°: rate per mA %.1f ± %.1f, at 0.2 mA %.1f ± %.1f", th, perMA[i], sigmas[i], perMA[0], sigmas[0])
			}
		}
		t.Logf("θ %.3f°: corrected rate per mA at 0.2…1.0 mA: %.1f", th, perMA)
	}
}

func TestRockingCurveWidth(t *testing.T) {
	// A θ-only scan with the detector fixed on first-order Cu Kα1 (a rocking curve). Independent Gaussian
	// broadenings add in quadrature (common practice), so √(W² − W0²), with W0 the width of a near-perfect
	// crystal on the same instrument, recovers the mosaic spread; we ask 10 %. Rates are corrected for dead time
	// first, as the flattened top of an uncorrected peak would widen it.
	th := braggDeg(t, "Cu", "Kα1", "LiF", 1)
	width := func(mosaic float64) float64 {
		b := newBench(t, Config{MosaicFWHMDeg: mosaic, Seed: 5}, 30, 1)
		span := 3 * math.Hypot(mosaic, 0.13)
		step := span / 60
		var x, y []float64
		for d := -span; d <= span+1e-9; d += step {
			x = append(x, th+d)
			y = append(y, b.corrected(b.rateAt(th+d, 2*th, 20*time.Second)))
		}
		return fwhm(x, y, (y[0]+y[len(y)-1])/2)
	}
	w0 := width(0.001)
	t.Logf("instrument width (mosaic 0.001°): %.4f°", w0)
	prev := w0
	for _, m := range []float64{0.05, 0.1, 0.2, 0.4, 0.8} {
		w := width(m)
		got := math.Sqrt(w*w - w0*w0)
		t.Logf("mosaic %.3f°: rocking FWHM %.4f°, deconvolved %.4f°", m, w, got)
		if math.Abs(got/m-1) > 0.10 {
			t.Errorf("mosaic %.3f°: deconvolved rocking width %.4f°", m, got)
		}
		if w <= prev {
			t.Errorf("mosaic %.3f°: rocking width %.4f° not above %.4f° of the narrower mosaic", m, w, prev)
		}
		prev = w
	}
}

func TestZeroOffsetsCanBeFound(t *testing.T) {
	// The motor reads more than the true angle by the zero offset. An alignment must find it to 0.02° (the
	// daemon's alignment target): the direct beam is centred on true 2θ = 0, and a rocking curve on first-order
	// Kα1, with the detector at its corrected angle, is centred on the true Bragg angle plus the θ offset.
	const thOff, ttOff = 0.37, -0.52
	b := newBench(t, Config{ThetaOffsetDeg: thOff, TwoThetaOffsetDeg: ttOff, Seed: 9}, 30, 1)
	var x, y []float64
	for tt := -1.5; tt <= 0.5+1e-9; tt += 0.02 {
		x, y = append(x, tt), append(y, b.corrected(b.rateAt(thOff, tt, 5*time.Second)))
	}
	if got := centre(x, y, 0); math.Abs(got-ttOff) > 0.02 {
		t.Errorf("direct beam centred at motor 2θ = %.4f°, offset %.2f°", got, ttOff)
	}
	th := braggDeg(t, "Cu", "Kα1", "LiF", 2)
	x, y = nil, nil
	for d := -0.4; d <= 0.4+1e-9; d += 0.01 {
		x, y = append(x, th+thOff+d), append(y, b.corrected(b.rateAt(th+thOff+d, 2*th+ttOff, 5*time.Second)))
	}
	if got := centre(x, y, (y[0]+y[len(y)-1])/2) - th; math.Abs(got-thOff) > 0.02 {
		t.Errorf("second-order Kα1 rocking curve centred %.4f° above the Bragg angle, θ offset %.2f°", got, thOff)
	}
}

func TestDetectorScan(t *testing.T) {
	// A 2θ-only scan with the crystal fixed at the first-order Kα1 Bragg angle: the detector profile is the
	// slit width (0.4° in 2θ by default) wide, centred on 2θB (Bragg geometry). Kα2, 0.12° higher in 2θ, is
	// reflected too when the crystal's mosaic admits it, so only the width is checked loosely.
	th := braggDeg(t, "Cu", "Kα1", "LiF", 1)
	b := newBench(t, Config{Seed: 13}, 30, 1)
	var x, y []float64
	for d := -0.6; d <= 0.6+1e-9; d += 0.01 {
		x, y = append(x, 2*th+d), append(y, b.corrected(b.rateAt(th, 2*th+d, 10*time.Second)))
	}
	w := fwhm(x, y, (y[0]+y[len(y)-1])/2)
	if w < 0.35 || w > 0.6 {
		t.Errorf("detector profile FWHM %.3f°, want about the 0.4° slit", w)
	}
	if c := centre(x, y, (y[0]+y[len(y)-1])/2); math.Abs(c-2*th) > 0.05 {
		t.Errorf("detector profile centred at 2θ %.3f°, want 2θB %.3f°", c, 2*th)
	}
}
