package xray

import "math"

// KramersContinuum is the thick-target bremsstrahlung photon spectrum by Kramers' law in Ebel's form
// (Ebel, X-Ray Spectrometry 28, 255, 1999, valid 5–50 kV): photons per second, steradian, mA and keV at
// photon energy e (keV) for tube voltage kV on an anode of atomic number z:
// 1.35e9 · Z · (E0/E − 1)^x with x = 1.109 − 0.00435 Z + 0.00175 E0. Zero at and above E0 = eU (Duane–Hunt).
// Absorption in the anode and the tube window is not included.
func KramersContinuum(z int, kV, e float64) float64 {
	if e <= 0 || e >= kV {
		return 0
	}
	x := 1.109 - 0.00435*float64(z) + 0.00175*kV
	return 1.35e9 * float64(z) * math.Pow(kV/e-1, x)
}

// LineExponent is the exponent n of the overvoltage law i·(U/U_edge − 1)^n for characteristic lines of a
// thick target (Green & Cosslett, J. Phys. D 1, 425, 1968; value from memory).
const LineExponent = 1.67

// LineExcitation is the overvoltage factor of a characteristic line: (U/U_edge − 1)^n above the edge, zero at
// and below it.
func LineExcitation(kV, edgeKeV float64) float64 {
	if kV <= edgeKeV || edgeKeV <= 0 {
		return 0
	}
	return math.Pow(kV/edgeKeV-1, LineExponent)
}
