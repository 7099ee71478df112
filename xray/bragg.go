package xray

import (
	"fmt"
	"math"
)

// Radians converts degrees to radians.
func Radians(deg float64) float64 { return deg * math.Pi / 180 }

// Degrees converts radians to degrees.
func Degrees(rad float64) float64 { return rad * 180 / math.Pi }

// WavelengthNM is Bragg's law solved for λ: nλ = 2d sin θ, with θ in degrees and d in nm.
func WavelengthNM(thetaDeg, dNM float64, order int) float64 {
	return 2 * dNM * math.Sin(Radians(thetaDeg)) / float64(order)
}

// BraggAngleDeg is Bragg's law solved for θ (degrees). ok is false when nλ > 2d: no reflection in that order.
func BraggAngleDeg(wavelengthNM, dNM float64, order int) (deg float64, ok bool) {
	s := float64(order) * wavelengthNM / (2 * dNM)
	if s <= 0 || s >= 1 || math.IsNaN(s) {
		return 0, false
	}
	return Degrees(math.Asin(s)), true
}

// EnergyKeV converts a wavelength in nm to a photon energy in keV: E = hc/λ.
func EnergyKeV(wavelengthNM float64) float64 { return HCkeVnm / wavelengthNM }

// WavelengthOfEnergyNM converts a photon energy in keV to a wavelength in nm: λ = hc/E.
func WavelengthOfEnergyNM(keV float64) float64 { return HCkeVnm / keV }

// DuaneHuntNM is the short-wavelength limit of a tube at kV kilovolts: λmin = hc/(eU).
func DuaneHuntNM(kV float64) float64 { return HCkeVnm / kV }

// ValidateOrder returns an error naming the order when it is not a positive diffraction order.
func ValidateOrder(order int) error {
	if order < 1 || order > 20 {
		return fmt.Errorf("order %d: must be 1..20", order)
	}
	return nil
}
