package analysis

import (
	"fmt"
	"math"
	"sort"

	"gonum.org/v1/gonum/stat/distuv"

	"goniod/xray"
)

// Limit is the short-wavelength (Duane–Hunt) limit of one scan.
type Limit struct {
	// KV is the tube voltage the scan was taken at (as given).
	KV         float64
	Wavelength Value // λmin, nm
	Theta      Value // first-order crystal angle of λmin, degrees
	// ReducedChi2 of the onset fit; FromNM and ToNM the wavelength range it used.
	ReducedChi2    float64
	FromNM, ToNM   float64
	PointsInWindow int
}

// onsetReach is how far above the onset, as a fraction of λmin, the fit follows the rising continuum.
const onsetReach = 0.25

// DuaneHunt finds the short-wavelength limit of a scan over the crystal angle θ of a crystal of spacing dNM
// (first order). The continuum rises from the background at λmin roughly linearly in λ − λmin (Kramers, Phil.
// Mag. 46, 836, 1923); the fit models the background as a constant and the rise as a quadratic in λ − λmin,
// both smoothed by a Gaussian instrument function of fitted width, and reports the onset λmin, where the
// extrapolated rise meets the background, with its standard error. kV, when known (> 0), places the fit window
// around hc/(eU); otherwise the onset is located from the data.
func DuaneHunt(s *Scan, dNM, kV float64) (Limit, error) {
	if !(dNM > 0.01) || dNM > 100 {
		return Limit{}, fmt.Errorf("%w: crystal d-spacing %g nm is outside [0.01, 100] nm", ErrData, dNM)
	}
	if !(kV >= 0) || kV > 1000 {
		return Limit{}, fmt.Errorf("%w: tube voltage %g kV is outside [0, 1000] kV", ErrData, kV)
	}
	lam := func(th float64) float64 { return xray.WavelengthNM(th, dNM, 1) }
	if s.X[0] <= 0 || s.X[s.Len()-1] >= 90 {
		return Limit{}, fmt.Errorf("%w: crystal angles must lie in (0, 90)°", ErrData)
	}
	guess := 0.0
	if kV > 0 {
		guess = xray.DuaneHuntNM(kV)
	} else {
		guess = onsetGuess(s, lam)
	}
	lo := sort.Search(s.Len(), func(i int) bool { return lam(s.X[i]) >= 0.97*guess })
	hi := sort.Search(s.Len(), func(i int) bool { return lam(s.X[i]) > (1+onsetReach)*guess }) - 1
	if lo < 3 {
		return Limit{}, fmt.Errorf("%w: %d points below the expected limit λ ≈ %.4f nm (θ ≈ %.2f°); start the scan at a smaller angle",
			ErrData, lo, guess, xray.Degrees(math.Asin(guess/(2*dNM))))
	}
	if hi-lo < 5 || lam(s.X[hi]) < (1+onsetReach/2)*guess {
		return Limit{}, fmt.Errorf("%w: %d points on the rise above λ ≈ %.4f nm; extend the scan to θ ≈ %.2f°",
			ErrData, max(hi-lo, 0), guess, xray.Degrees(math.Asin(math.Min((1+onsetReach)*guess/(2*dNM), 1))))
	}
	var b0, t0 float64
	for i := range lo {
		b0, t0 = b0+s.Rate[i]*s.Dwell[i], t0+s.Dwell[i]
	}
	b0 /= t0
	var rise, lsum float64
	for i := lo; i <= hi; i++ {
		rise, lsum = rise+s.Rate[i]-b0, lsum+lam(s.X[i])-guess
	}
	slope := math.Max(rise/math.Max(lsum, 1e-12), 1e-9)
	stepNM := lam(s.X[lo+1]) - lam(s.X[lo])
	model := func(th float64, p, grad []float64) float64 {
		l := lam(th)
		sg := p[4]
		z := (l - p[3]) / sg
		cdf, pdf := distuv.UnitNormal.CDF(z), distuv.UnitNormal.Prob(z)
		r1 := sg * (z*cdf + pdf)
		r2 := sg * sg * ((z*z+1)*cdf + z*pdf)
		grad[0], grad[1], grad[2] = 1, r1, r2
		// ∂r1/∂λ0 = −Φ(z), ∂r2/∂λ0 = −2 sg (zΦ + φ); ∂r1/∂σ = φ, ∂r2/∂σ = 2σΦ.
		grad[3] = -p[1]*cdf - p[2]*2*r1
		grad[4] = p[1]*pdf + p[2]*2*sg*cdf
		return p[0] + p[1]*r1 + p[2]*r2
	}
	p0 := []float64{b0, slope, 0, guess, math.Max(stepNM, 1e-4*guess)}
	lower := []float64{math.Inf(-1), 0, math.Inf(-1), lam(s.X[0]), math.Max(0.3*stepNM, 1e-6*guess)}
	upper := []float64{math.Inf(1), math.Inf(1), math.Inf(1), lam(s.X[hi]), 0.1 * guess}
	fit, err := fitPoisson(s, 0, hi, model, p0, lower, upper, nil)
	if err != nil || fit.P[4] <= lower[4]*1.0001 {
		// A sharper onset than the steps resolve: hold the smoothing at its smallest value.
		p0[4] = lower[4]
		fit, err = fitPoisson(s, 0, hi, model, p0, lower, upper, []bool{false, false, false, false, true})
	}
	if err != nil {
		return Limit{}, fmt.Errorf("onset fit: %w", err)
	}
	l0, e0 := fit.P[3], fit.ScaledErr(3)
	th := xray.Degrees(math.Asin(l0 / (2 * dNM)))
	thErr := xray.Degrees(e0 / (2 * dNM * math.Cos(xray.Radians(th))))
	return Limit{KV: kV, Wavelength: Value{l0, e0}, Theta: Value{th, thErr}, ReducedChi2: fit.ReducedChi2(),
		FromNM: lam(s.X[0]), ToNM: lam(s.X[hi]), PointsInWindow: hi + 1}, nil
}

// onsetGuess locates the rise from the data: the first wavelength where the 5-point running rate climbs a
// tenth of the way from the background of the first points to the scan's maximum.
func onsetGuess(s *Scan, lam func(float64) float64) float64 {
	n := s.Len()
	sm := make([]float64, n)
	for i := range n {
		a, b := max(i-2, 0), min(i+3, n)
		var c, t float64
		for j := a; j < b; j++ {
			c, t = c+s.Rate[j]*s.Dwell[j], t+s.Dwell[j]
		}
		sm[i] = c / t
	}
	base := sm[min(2, n-1)]
	top := base
	for _, v := range sm {
		top = math.Max(top, v)
	}
	for i, v := range sm {
		if v > base+0.1*(top-base) {
			return lam(s.X[max(i-2, 0)])
		}
	}
	return lam(s.X[0])
}

// Planck is Planck's constant from the short-wavelength limits of a tube-voltage series.
type Planck struct {
	// H in J·s.
	H Value
	// InterceptNM of the fit λmin = a + (hc/e)/U (zero and not fitted with only two voltages).
	InterceptNM     Value
	InterceptFitted bool
	ReducedChi2     float64
}

// PlanckFromLimits fits λmin against 1/U: λmin = hc/(eU) (Duane & Hunt, Phys. Rev. 6, 166, 1915). With three or
// more voltages the straight line has a free intercept (absorbing a constant angle offset); with two it passes
// through the origin. h = slope·e/c, CODATA 2018 constants.
func PlanckFromLimits(ls []Limit) (Planck, error) {
	if len(ls) < 2 {
		return Planck{}, fmt.Errorf("%w: Planck's constant needs limits at two or more tube voltages, have %d", ErrData, len(ls))
	}
	x, y, w := make([]float64, len(ls)), make([]float64, len(ls)), make([]float64, len(ls))
	for i, l := range ls {
		if !(l.KV > 0) || !(l.Wavelength.Err > 0) {
			return Planck{}, fmt.Errorf("%w: limit %d needs a tube voltage > 0 and a wavelength error > 0", ErrData, i)
		}
		x[i], y[i], w[i] = 1/l.KV, l.Wavelength.Value, 1/(l.Wavelength.Err*l.Wavelength.Err)
	}
	var out Planck
	var slope, serr, chi2 float64
	dof := len(ls) - 1
	var sw, sx, sy, sxx, sxy float64
	for i := range x {
		sw, sx, sy, sxx, sxy = sw+w[i], sx+w[i]*x[i], sy+w[i]*y[i], sxx+w[i]*x[i]*x[i], sxy+w[i]*x[i]*y[i]
	}
	a := 0.0
	if len(ls) >= 3 {
		det := sw*sxx - sx*sx
		if !(det > 0) {
			return Planck{}, fmt.Errorf("%w: the tube voltages must differ", ErrData)
		}
		slope, a = (sw*sxy-sx*sy)/det, (sxx*sy-sx*sxy)/det
		serr = math.Sqrt(sw / det)
		out.InterceptNM, out.InterceptFitted = Value{a, math.Sqrt(sxx / det)}, true
		dof = len(ls) - 2
	} else {
		slope, serr = sxy/sxx, 1/math.Sqrt(sxx)
	}
	for i := range x {
		r := y[i] - a - slope*x[i]
		chi2 += w[i] * r * r
	}
	scale := 1.0
	if dof > 0 {
		out.ReducedChi2 = chi2 / float64(dof)
		if out.ReducedChi2 > 1 {
			scale = math.Sqrt(out.ReducedChi2)
		}
	}
	out.InterceptNM.Err *= scale
	// slope is hc/e in nm·kV = 1e-6 V·m.
	toH := 1e-6 * xray.ElementaryChargeC / xray.SpeedOfLightMs
	out.H = Value{slope * toH, serr * scale * toH}
	return out, nil
}
