package xray

import (
	"math"
	"testing"
)

func TestKramersContinuum(t *testing.T) {
	// Ebel, X-Ray Spectrometry 28, 255, 1999: 1.35e9·Z·(E0/E − 1)^x, x = 1.109 − 0.00435 Z + 0.00175 E0.
	// Cu, 30 kV, 10 keV: x = 1.03535, so 1.35e9 · 29 · 2^1.03535, worked by hand.
	if got, want := KramersContinuum(29, 30, 10), 1.35e9*29*math.Pow(2, 1.03535); math.Abs(got/want-1) > 1e-9 {
		t.Errorf("Cu 30 kV at 10 keV: %.5g, want %.5g photons/(s sr mA keV)", got, want)
	}
	// Duane–Hunt: no photon at or above E0 = eU.
	for _, e := range []float64{30, 30.001, 40} {
		if got := KramersContinuum(29, 30, e); got != 0 {
			t.Errorf("30 kV at %g keV: %g, want 0 above the Duane–Hunt limit", e, got)
		}
	}
	// Kramers' law: the spectrum falls with energy and grows with Z (Kramers, Phil. Mag. 46, 836, 1923).
	prev := math.Inf(1)
	for e := 1.0; e < 30; e++ {
		s := KramersContinuum(29, 30, e)
		if s <= 0 || s >= prev {
			t.Errorf("30 kV at %g keV: %g, want positive and below %g", e, s, prev)
		}
		prev = s
	}
	if KramersContinuum(42, 30, 10) <= KramersContinuum(29, 30, 10) {
		t.Error("Mo continuum not above Cu's at equal voltage")
	}
}

func TestLineExcitation(t *testing.T) {
	// Overvoltage law i·(U/U_K − 1)^n (Green & Cosslett, J. Phys. D 1, 425, 1968; n from memory): zero at and
	// below the edge, 1 at U = 2 U_K, and (2^n) at U = 3 U_K.
	for _, c := range []struct{ kV, edge, want float64 }{
		{8.9, 8.98, 0}, {8.98, 8.98, 0}, {17.96, 8.98, 1}, {26.94, 8.98, math.Pow(2, LineExponent)},
	} {
		if got := LineExcitation(c.kV, c.edge); math.Abs(got-c.want) > 1e-12 {
			t.Errorf("LineExcitation(%g kV, edge %g keV) = %g, want %g", c.kV, c.edge, got, c.want)
		}
	}
}
