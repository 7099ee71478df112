package analysis

import (
	"fmt"
	"math"

	"goniod/xray"
)

// DefaultAngleErrDeg is the angle uncertainty a lattice fit assumes for every reflection when none is given:
// about 0.1° of alignment and reading (common practice).
const DefaultAngleErrDeg = 0.1

// Reflection is one Bragg reflection: crystal angle θ with its standard error (e.g. from a peak fit), order
// n and wavelength λ.
type Reflection struct {
	ThetaDeg, ThetaErrDeg float64
	Order                 int
	WavelengthNM          float64
}

// Lattice is a fitted lattice spacing.
type Lattice struct {
	D           Value // nm
	ReducedChi2 float64
	DoF         int
	Used        []Reflection
	// Residuals are nλ/2 − d sin θ per reflection, nm.
	Residuals []float64
}

// ReflectionsOf turns identified lines into reflections, the peak-fit error as the angle error.
func ReflectionsOf(ls Lines) []Reflection {
	out := make([]Reflection, 0, len(ls.Matches))
	for _, m := range ls.Matches {
		out = append(out, Reflection{ThetaDeg: m.Peak.Centre.Value, ThetaErrDeg: m.Peak.Centre.Err, Order: m.Order,
			WavelengthNM: m.Line.WavelengthNM()})
	}
	return out
}

// FitLattice fits d in nλ/2 = d·sin θ through the origin by weighted least squares with the effective-variance
// method: each reflection's angle error (its own, combined in quadrature with angleErrDeg common to all)
// becomes an error of nλ/2 through the slope, σ²_eff = (d cos θ σ_θ)², and the fit is iterated because the
// weights depend on d. d = Σwxy/Σwx², σ_d = (Σwx²)^−½, scaled by √χ²_ν when χ²_ν > 1 (Orear, Am. J. Phys. 50,
// 912, 1982 on effective variance; Bevington & Robinson, Data Reduction and Error Analysis, on weighted fits).
func FitLattice(refl []Reflection, angleErrDeg float64) (Lattice, error) {
	if len(refl) == 0 {
		return Lattice{}, fmt.Errorf("%w: no reflections to fit", ErrData)
	}
	if !(angleErrDeg >= 0) || angleErrDeg > 10 {
		return Lattice{}, fmt.Errorf("%w: angle error %g° is outside [0, 10]°", ErrData, angleErrDeg)
	}
	n := len(refl)
	x, y, sth := make([]float64, n), make([]float64, n), make([]float64, n)
	for i, r := range refl {
		switch {
		case !(r.ThetaDeg > 0 && r.ThetaDeg < 90):
			return Lattice{}, fmt.Errorf("%w: reflection %d: θ = %g° is outside (0, 90)°", ErrData, i, r.ThetaDeg)
		case r.Order < 1 || r.Order > 20:
			return Lattice{}, fmt.Errorf("%w: reflection %d: order %d is outside [1, 20]", ErrData, i, r.Order)
		case !(r.WavelengthNM > 0) || r.WavelengthNM > 100:
			return Lattice{}, fmt.Errorf("%w: reflection %d: wavelength %g nm is outside (0, 100] nm", ErrData, i, r.WavelengthNM)
		case !(r.ThetaErrDeg >= 0) || r.ThetaErrDeg > 10:
			return Lattice{}, fmt.Errorf("%w: reflection %d: angle error %g° is outside [0, 10]°", ErrData, i, r.ThetaErrDeg)
		}
		x[i] = math.Sin(xray.Radians(r.ThetaDeg))
		y[i] = float64(r.Order) * r.WavelengthNM / 2
		sth[i] = xray.Radians(math.Hypot(r.ThetaErrDeg, angleErrDeg))
	}
	var sxy, sxx float64
	for i := range n {
		sxy, sxx = sxy+x[i]*y[i], sxx+x[i]*x[i]
	}
	d := sxy / sxx
	w := make([]float64, n)
	for range 50 {
		sxy, sxx = 0, 0
		for i, r := range refl {
			se := d * math.Cos(xray.Radians(r.ThetaDeg)) * sth[i]
			w[i] = 1 / math.Max(se*se, 1e-30)
			sxy, sxx = sxy+w[i]*x[i]*y[i], sxx+w[i]*x[i]*x[i]
		}
		next := sxy / sxx
		done := math.Abs(next-d) <= 1e-15*d
		d = next
		if done {
			break
		}
	}
	out := Lattice{D: Value{d, 1 / math.Sqrt(sxx)}, DoF: n - 1, Used: refl, Residuals: make([]float64, n)}
	var chi2 float64
	for i := range n {
		out.Residuals[i] = y[i] - d*x[i]
		chi2 += w[i] * out.Residuals[i] * out.Residuals[i]
	}
	if out.DoF > 0 {
		out.ReducedChi2 = chi2 / float64(out.DoF)
		if out.ReducedChi2 > 1 {
			out.D.Err *= math.Sqrt(out.ReducedChi2)
		}
	}
	return out, nil
}
