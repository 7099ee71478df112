package sim

import "goniod/xray"

// specimen is what the simulator assumes about a particular analyzer crystal beyond its d-spacing: a typical
// mosaic spread, its integrated reflectivity relative to LiF(200), and how its reflectivity falls with order.
type specimen struct {
	mosaicFWHMDeg float64
	reflectivity  float64
	// orders[n-1] is the reflectivity of order n relative to order 1, at equal Bragg angle.
	orders []float64
}

// order is the relative reflectivity of order n; zero beyond the table.
func (s specimen) order(n int) float64 {
	if n < 1 || n > len(s.orders) {
		return 0
	}
	return s.orders[n-1]
}

// specimens by crystal name. Order ratios: kinematic |F(n·hkl)|²/|F(hkl)|² from xraylib 4.0.0
// (Crystal_F_H_StructureFactor at 8.05 keV) times a Debye–Waller factor exp(−2B·Δ(sin θ/λ)²) with B = 1 Å²
// (a typical room-temperature value, from memory); where xraylib's form-factor table ends the ratio is
// continued geometrically. KBr, absent from xraylib, copies KCl. Forbidden orders (Si, Ge (222)) are removed by
// xray.Crystal.OrderAllowed. Mosaic spreads and reflectivities are typical values from memory, chosen for a
// believable simulator; only LiF(200) enters the calibration.
var specimens = map[string]specimen{
	"LiF(200)":      {0.08, 1.0, []float64{1, 0.19, 0.029, 0.0034, 0.0003}},
	"NaCl(200)":     {0.15, 0.7, []float64{1, 0.41, 0.17, 0.062, 0.020, 0.0058}},
	"KCl(200)":      {0.15, 0.6, []float64{1, 0.43, 0.21, 0.11, 0.052, 0.022}},
	"KBr(200)":      {0.2, 0.6, []float64{1, 0.43, 0.21, 0.11, 0.052, 0.022}},
	"Si(111)":       {0.003, 0.25, []float64{1, 0, 0.26, 0.22, 0.17, 0}},
	"Ge(111)":       {0.005, 0.5, []float64{1, 0, 0.26, 0.22, 0.17, 0}},
	"graphite(002)": {0.4, 1.5, []float64{1, 0.30, 0.12, 0.065, 0.032, 0.014}},
	"mica(002)":     {0.03, 0.03, []float64{1, 1.6, 10, 1.6, 18, 0.82}},
}

// specimenOf returns the simulator's specimen of a crystal from the xray table.
func specimenOf(c xray.Crystal) specimen { return specimens[c.Name] }
