package analysis

import (
	"fmt"
	"math"
	"sort"

	"goniod/xray"
)

// DefaultToleranceDeg is the largest residual, in degrees, at which a peak is matched to a line by default.
const DefaultToleranceDeg = 0.15

// LineMatch is a peak identified as an emission line in a diffraction order.
type LineMatch struct {
	Peak  Peak
	Line  xray.Line
	Order int
	// ExpectedDeg is the Bragg angle of the line in this order; ResidualDeg = centre − expected.
	ExpectedDeg, ResidualDeg float64
	// Doublet is set when the peak was an unresolved Kα1/Kα2 blend refitted as a doublet: Peak is then the
	// Kα1 component.
	Doublet bool
}

// Label is the line and order, e.g. "Kα1, n = 2".
func (m LineMatch) Label() string { return fmt.Sprintf("%s, n = %d", m.Line.Name, m.Order) }

// Lines is the result of a line identification.
type Lines struct {
	Anode     string
	DNM       float64
	Matches   []LineMatch
	Unmatched []Peak
	Notes     []string
}

// LineOptions steer IdentifyLines.
type LineOptions struct {
	// ToleranceDeg is the largest accepted residual (0: DefaultToleranceDeg).
	ToleranceDeg float64
	// MaxOrder is the highest diffraction order tried (0: every order the crystal reflects).
	MaxOrder int
	// Shape of the doublet refit (the shape the peaks were fitted with).
	Shape Shape
}

// IdentifyLines matches peaks found on the crystal axis (θ) to the anode's lines in every diffraction order
// nλ = 2d sin θ, each line and order to at most one peak, closest residual first. A Kα1 peak whose Kα2
// partner lies within 1.5 FWHM and was not found separately is a blend: with the scan s given it is refitted as
// a Kα1/Kα2 doublet, the Kα2 position tied to Kα1 through the ratio of their wavelengths and its intensity fixed
// at the table ratio, so the reported centre is that of Kα1.
func IdentifyLines(s *Scan, peaks Peaks, anode xray.Anode, dNM float64, o LineOptions) (Lines, error) {
	tol := o.ToleranceDeg
	if tol == 0 {
		tol = DefaultToleranceDeg
	}
	if !(tol > 0) || tol > 5 {
		return Lines{}, fmt.Errorf("%w: tolerance %g° is outside (0, 5]°", ErrData, tol)
	}
	if !(dNM > 0.01) || dNM > 100 {
		return Lines{}, fmt.Errorf("%w: crystal d-spacing %g nm is outside [0.01, 100] nm", ErrData, dNM)
	}
	if o.MaxOrder < 0 || o.MaxOrder > 20 {
		return Lines{}, fmt.Errorf("%w: highest order %d is outside [0, 20]", ErrData, o.MaxOrder)
	}
	type cand struct {
		peak, line, order int
		expected, res     float64
	}
	var cands []cand
	for pi, p := range peaks.Peaks {
		for li, l := range anode.Lines {
			for n := 1; o.MaxOrder == 0 && n <= 20 || n <= o.MaxOrder; n++ {
				th, ok := xray.BraggAngleDeg(l.WavelengthNM(), dNM, n)
				if !ok {
					break
				}
				if r := p.Centre.Value - th; math.Abs(r) <= tol {
					cands = append(cands, cand{pi, li, n, th, r})
				}
			}
		}
	}
	sort.SliceStable(cands, func(a, b int) bool { return math.Abs(cands[a].res) < math.Abs(cands[b].res) })
	out := Lines{Anode: anode.Symbol, DNM: dNM}
	usedPeak := map[int]bool{}
	usedLine := map[[2]int]bool{}
	for _, c := range cands {
		if usedPeak[c.peak] || usedLine[[2]int{c.line, c.order}] {
			continue
		}
		usedPeak[c.peak], usedLine[[2]int{c.line, c.order}] = true, true
		out.Matches = append(out.Matches, LineMatch{Peak: peaks.Peaks[c.peak], Line: anode.Lines[c.line], Order: c.order,
			ExpectedDeg: c.expected, ResidualDeg: c.res})
	}
	for pi, p := range peaks.Peaks {
		if !usedPeak[pi] {
			out.Unmatched = append(out.Unmatched, p)
		}
	}
	if s != nil {
		out.refitDoublets(s, peaks, anode, o.Shape)
	}
	sort.Slice(out.Matches, func(a, b int) bool { return out.Matches[a].Peak.Centre.Value < out.Matches[b].Peak.Centre.Value })
	return out, nil
}

// refitDoublets replaces unresolved Kα1 blends by the Kα1 component of a doublet fit.
func (ls *Lines) refitDoublets(s *Scan, peaks Peaks, anode xray.Anode, shape Shape) {
	a1, ok1 := anode.Line("Kα1")
	a2, ok2 := anode.Line("Kα2")
	if !ok1 || !ok2 {
		return
	}
	have2 := map[int]bool{}
	for _, m := range ls.Matches {
		if m.Line.Name == a2.Name {
			have2[m.Order] = true
		}
	}
	for k, m := range ls.Matches {
		if m.Line.Name != a1.Name || have2[m.Order] {
			continue
		}
		th2, ok := xray.BraggAngleDeg(a2.WavelengthNM(), ls.DNM, m.Order)
		if !ok || th2-m.ExpectedDeg >= 1.5*m.Peak.FWHM.Value {
			continue
		}
		p, err := fitDoublet(s, m.Peak, peaks, shape, a2.WavelengthNM()/a1.WavelengthNM(), a2.Relative/a1.Relative)
		if err != nil {
			ls.Notes = append(ls.Notes, fmt.Sprintf("%s: Kα1/Kα2 doublet refit failed (%v); the centre is the blend's", m.Label(), err))
			continue
		}
		ls.Matches[k].Peak, ls.Matches[k].Doublet = p, true
		ls.Matches[k].ResidualDeg = p.Centre.Value - m.ExpectedDeg
	}
}

// fitDoublet fits a straight-line background, the doublet (Kα1 at c, Kα2 at asin(ρ sin c) with the same width
// and ratio·area) and, free, any other peak whose centre lies in the window.
func fitDoublet(s *Scan, blend Peak, all Peaks, shape Shape, rho, ratio float64) (Peak, error) {
	np := shape.params()
	w := blend.FWHM.Value
	c2 := func(c float64) float64 { return xray.Degrees(math.Asin(rho * math.Sin(xray.Radians(c)))) }
	sep := c2(blend.Centre.Value) - blend.Centre.Value
	xl, xh := blend.Centre.Value-sep-shape.halfWindow()*w, blend.Centre.Value+2*sep+shape.halfWindow()*w
	lo, hi := sort.SearchFloat64s(s.X, xl), min(sort.SearchFloat64s(s.X, xh), s.Len()-1)
	var others []Peak
	for _, p := range all.Peaks {
		if p.Centre.Value != blend.Centre.Value && p.Centre.Value > s.X[lo] && p.Centre.Value < s.X[hi] {
			others = append(others, p)
		}
	}
	nparams := 2 + np*(1+len(others))
	if hi-lo+1 < nparams+4 {
		return Peak{}, fmt.Errorf("%d points in the window are too few", hi-lo+1)
	}
	xref := blend.Centre.Value
	p0, lower, upper := make([]float64, nparams), make([]float64, nparams), make([]float64, nparams)
	for k := range p0 {
		lower[k], upper[k] = math.Inf(-1), math.Inf(1)
	}
	p0[0], p0[1] = blend.Background, 0
	set := func(o int, p Peak, area float64) {
		p0[o], p0[o+1], p0[o+2] = p.Centre.Value, p.FWHM.Value, area
		lower[o], upper[o] = s.X[lo], s.X[hi]
		lower[o+1], upper[o+1] = 0.3*s.Step(), s.X[hi]-s.X[lo]
		lower[o+2] = 0
		if shape == PseudoVoigt {
			p0[o+3], lower[o+3], upper[o+3] = math.Max(p.Eta.Value, 0.1), 0, 1
		}
	}
	set(2, blend, blend.Area.Value/(1+ratio))
	p0[2] = blend.Centre.Value - sep*ratio/(1+ratio)
	for k, p := range others {
		set(2+np*(1+k), p, p.Area.Value)
	}
	g2, q2 := make([]float64, np), make([]float64, np)
	model := func(x float64, p, grad []float64) float64 {
		f := p[0] + p[1]*(x-xref)
		grad[0], grad[1] = 1, x-xref
		q := p[2 : 2+np]
		f += shape.profile(x, q, grad[2:2+np])
		cr := xray.Radians(q[0])
		s2 := rho * math.Sin(cr)
		copy(q2, q)
		q2[0], q2[2] = xray.Degrees(math.Asin(s2)), ratio*q[2]
		f += shape.profile(x, q2, g2)
		grad[2] += g2[0] * rho * math.Cos(cr) / math.Sqrt(1-s2*s2)
		grad[3] += g2[1]
		grad[4] += ratio * g2[2]
		if np == 4 {
			grad[5] += g2[3]
		}
		for k := 1; k <= len(others); k++ {
			o := 2 + np*k
			f += shape.profile(x, p[o:o+np], grad[o:o+np])
		}
		return f
	}
	fit, err := fitPoisson(s, lo, hi, model, p0, lower, upper, nil)
	if err != nil {
		return Peak{}, err
	}
	q := fit.P[2 : 2+np]
	if q[2] <= 0 || q[1] <= lower[3]*1.0001 {
		return Peak{}, fmt.Errorf("the doublet fit did not settle on a peak")
	}
	out := blend
	out.Centre, out.FWHM, out.Area = Value{q[0], fit.ScaledErr(2)}, Value{q[1], fit.ScaledErr(3)}, Value{q[2], fit.ScaledErr(4)}
	if shape == PseudoVoigt {
		out.Eta = Value{q[3], fit.ScaledErr(5)}
	}
	out.Height = shape.height(q)
	out.Background, out.bgSlope = fit.P[0]+fit.P[1]*(q[0]-xref), fit.P[1]
	out.ReducedChi2 = fit.ReducedChi2()
	return out, nil
}
