package analysis

import (
	"fmt"
	"math"
	"sort"
)

// Value is a measured quantity with its standard error.
type Value struct {
	Value float64 `json:"value"`
	Err   float64 `json:"err"`
}

// Peak is one fitted peak. Rates are dead-time-corrected (true) rates.
type Peak struct {
	// Centre and FWHM in degrees of the abscissa.
	Centre, FWHM Value
	// Area above the background, (counts per second)·degree.
	Area Value
	// Eta is the Lorentzian fraction of a pseudo-Voigt (zero for the other shapes).
	Eta Value
	// Height of the profile and level of the background at the centre, counts per second.
	Height, Background float64
	// Significance of the detection, in standard deviations.
	Significance float64
	// ReducedChi2 of the fit of the peak's group.
	ReducedChi2 float64
	// Group numbers the peaks fitted together (an overlapping doublet shares one).
	Group int
	// bgSlope is the slope of the fitted background, cps per degree.
	bgSlope float64
}

// Peaks is the result of a peak search and fit.
type Peaks struct {
	Shape Shape
	Peaks []Peak
	// FWHMDeg is the width scale the search used (given or estimated from the data).
	FWHMDeg float64
	// Notes tell about peaks found but not fitted.
	Notes []string
}

// PeakOptions steer FindPeaks.
type PeakOptions struct {
	// Significance is the detection threshold in standard deviations (0: DefaultSignificance).
	Significance float64
	// FWHMDeg is the expected peak width in degrees (0: estimated from the most significant feature).
	FWHMDeg float64
	Shape   Shape
}

// FindPeaks searches a scan for peaks that stand out of the background by the significance threshold and fits
// each by weighted least squares with a straight-line background. Peaks closer than the fit window of their
// neighbours (overlapping doublets) are fitted together and share a group number.
func FindPeaks(s *Scan, o PeakOptions) (Peaks, error) {
	k := o.Significance
	if k == 0 {
		k = DefaultSignificance
	}
	if !(k > 0) || k > 100 {
		return Peaks{}, fmt.Errorf("%w: significance %g σ is outside (0, 100]", ErrData, k)
	}
	if !(o.FWHMDeg >= 0) {
		return Peaks{}, fmt.Errorf("%w: expected FWHM %g° must be ≥ 0", ErrData, o.FWHMDeg)
	}
	cs, sr, fwhm := search(s, k, o.FWHMDeg)
	out := Peaks{Shape: o.Shape, FWHMDeg: fwhm}
	for g, grp := range groups(s, cs, o.Shape) {
		ps, err := fitGroup(s, sr, grp, o.Shape)
		if err != nil {
			for _, c := range grp {
				out.Notes = append(out.Notes, fmt.Sprintf("peak near %.4f° (%.1fσ) not fitted: %v", s.X[c.i], c.z, err))
			}
			continue
		}
		for _, p := range ps {
			p.Group = g
			out.Peaks = append(out.Peaks, p)
		}
	}
	sort.Slice(out.Peaks, func(a, b int) bool { return out.Peaks[a].Centre.Value < out.Peaks[b].Centre.Value })
	return out, nil
}

// groups joins candidates whose fit windows overlap.
func groups(s *Scan, cs []candidate, shape Shape) [][]candidate {
	var out [][]candidate
	for n, c := range cs {
		if n > 0 {
			p := cs[n-1]
			reach := shape.halfWindow() * (p.fwhm + c.fwhm)
			if p.run == c.run || s.X[c.i]-s.X[p.i] < reach {
				out[len(out)-1] = append(out[len(out)-1], c)
				continue
			}
		}
		out = append(out, []candidate{c})
	}
	return out
}

// groupModel is a straight-line background about xref plus one profile per peak:
// p = (a, b, q₁…, q₂…, …) with q = (centre, FWHM, area[, η]).
func groupModel(shape Shape, npk int, xref float64) Model {
	np := shape.params()
	return func(x float64, p, grad []float64) float64 {
		f := p[0] + p[1]*(x-xref)
		grad[0], grad[1] = 1, x-xref
		for k := range npk {
			o := 2 + k*np
			f += shape.profile(x, p[o:o+np], grad[o:o+np])
		}
		return f
	}
}

// window returns the index range [lo, hi] the fit of a group uses: the group's peaks plus halfWindow FWHM on
// either side, with at least enough points for the parameters.
func fitWindow(s *Scan, grp []candidate, shape Shape, nparams int) (lo, hi int) {
	first, last := grp[0], grp[len(grp)-1]
	xl := s.X[first.i] - shape.halfWindow()*first.fwhm
	xh := s.X[last.i] + shape.halfWindow()*last.fwhm
	lo = sort.SearchFloat64s(s.X, xl)
	hi = sort.SearchFloat64s(s.X, xh)
	if hi >= s.Len() {
		hi = s.Len() - 1
	}
	for hi-lo+1 < nparams+4 && (lo > 0 || hi < s.Len()-1) {
		lo, hi = max(lo-1, 0), min(hi+1, s.Len()-1)
	}
	return lo, hi
}

// fitGroup fits the candidates of one group together.
func fitGroup(s *Scan, sr *searcher, grp []candidate, shape Shape) ([]Peak, error) {
	np := shape.params()
	nparams := 2 + np*len(grp)
	lo, hi := fitWindow(s, grp, shape, nparams)
	x := s.X[lo : hi+1]
	xref := 0.5 * (x[0] + x[len(x)-1])
	p0 := make([]float64, nparams)
	lower, upper := make([]float64, nparams), make([]float64, nparams)
	bl, bh := s.trueOf(sr.bg[lo]), s.trueOf(sr.bg[hi])
	p0[0], p0[1] = 0.5*(bl+bh), 0
	if x[len(x)-1] > x[0] {
		p0[1] = (bh - bl) / (x[len(x)-1] - x[0])
	}
	lower[0], lower[1], upper[0], upper[1] = math.Inf(-1), math.Inf(-1), math.Inf(1), math.Inf(1)
	step := s.Step()
	for k, c := range grp {
		o := 2 + k*np
		height := math.Max(s.trueOf(c.bg+c.excess)-s.trueOf(c.bg), 0)
		p0[o], p0[o+1] = s.X[c.i], c.fwhm
		lower[o], upper[o] = x[0], x[len(x)-1]
		lower[o+1], upper[o+1] = 0.3*step, x[len(x)-1]-x[0]
		lower[o+2], upper[o+2] = 0, math.Inf(1)
		if shape == PseudoVoigt {
			p0[o+3], lower[o+3], upper[o+3] = 0.5, 0, 1
		}
		p0[o+2] = height * c.fwhm * shape.areaPerHeightFWHM(0.5)
	}
	fit, err := fitPoisson(s, lo, hi, groupModel(shape, len(grp), xref), p0, lower, upper, nil)
	if err != nil {
		return nil, err
	}
	var out []Peak
	for k, c := range grp {
		o := 2 + k*np
		q := fit.P[o : o+np]
		p := Peak{
			Centre: Value{q[0], fit.ScaledErr(o)}, FWHM: Value{q[1], fit.ScaledErr(o + 1)},
			Area: Value{q[2], fit.ScaledErr(o + 2)}, Height: shape.height(q),
			Background: fit.P[0] + fit.P[1]*(q[0]-xref), Significance: c.z, ReducedChi2: fit.ReducedChi2(),
			bgSlope: fit.P[1],
		}
		if shape == PseudoVoigt {
			p.Eta = Value{q[3], fit.ScaledErr(o + 3)}
		}
		if q[2] <= 0 || q[1] <= lower[o+1]*1.0001 || q[1] >= upper[o+1]*0.9999 {
			return nil, fmt.Errorf("the fit of the peak at %.4f° did not settle on a peak", s.X[c.i])
		}
		out = append(out, p)
	}
	return out, nil
}

// fitPoisson fits model to the true rates of points [lo, hi] with Poisson weights, iteratively reweighted: the
// first fit weights each point by its own counts, the next ones by the counts the fitted model predicts, which
// converges to the Poisson maximum-likelihood fit (Charles, Frome & Yu, JASA 71, 253 (1976) on iteratively
// reweighted least squares).
func fitPoisson(s *Scan, lo, hi int, model Model, p0, lower, upper []float64, fixed []bool) (Fit, error) {
	x, y := s.X[lo:hi+1], s.Rate[lo:hi+1]
	sig := make([]float64, len(x))
	for i := range sig {
		sig[i] = s.dataSigma(lo + i)
	}
	pr := Problem{X: x, Y: y, Sigma: sig, Model: model, Lower: lower, Upper: upper, Fixed: fixed}
	fit, err := LevenbergMarquardt(pr, p0)
	if err != nil {
		return fit, err
	}
	grad := make([]float64, len(p0))
	for range 3 {
		for i := range sig {
			sig[i] = s.sigmaAt(lo+i, model(x[i], fit.P, grad))
		}
		prev := fit
		if fit, err = LevenbergMarquardt(pr, append([]float64(nil), fit.P...)); err != nil {
			return fit, err
		}
		settled := true
		for k := range fit.P {
			if math.Abs(fit.P[k]-prev.P[k]) > 1e-3*fit.Err[k] {
				settled = false
			}
		}
		if settled {
			break
		}
	}
	return fit, nil
}
