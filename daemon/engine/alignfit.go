package engine

import (
	"errors"
	"fmt"
	"math"

	goniodv1 "goniod/proto/goniod/v1"
	"goniod/xray/analysis"
)

// profile is one axis scan of the alignment: angle, dead-time-corrected rate and its standard error.
type profile struct {
	x, y, sigma []float64
}

// axisProfile takes the read-back angle of axis and the corrected rate of each point. A point without counts
// gets the error of one count, so that it still weighs in the fit.
func axisProfile(pts []*goniodv1.Point, axis string) profile {
	var p profile
	for _, pt := range pts {
		for _, a := range pt.Axes {
			if a.Name != axis {
				continue
			}
			p.x = append(p.x, a.ActualDeg)
			p.y = append(p.y, pt.CorrectedRateCps)
			p.sigma = append(p.sigma, math.Max(pt.CorrectedRateErrCps, 1/pt.DwellS))
		}
	}
	return p
}

// strongest returns the requested angle of axis where a coarse scan counted most, taking each point with its
// neighbours so that a single noisy point does not decide.
func strongest(pts []*goniodv1.Point, axis string) float64 {
	best, at := math.Inf(-1), 0.0
	for i := range pts {
		sum := 0.0
		for k := max(i-1, 0); k <= min(i+1, len(pts)-1); k++ {
			sum += pts[k].CorrectedRateCps
		}
		if sum > best {
			for _, a := range pts[i].Axes {
				if a.Name == axis {
					best, at = sum, a.SetDeg
				}
			}
		}
	}
	return at
}

// peakFit is the centre of a fitted profile with its standard error, and its width (degrees).
type peakFit struct {
	Centre, Err, Width float64
}

// How many standard errors a point must stand above the background for a peak to count: in a coarse search
// (short dwell; a chance excess of 5 σ in one point has odds below 1e-6 by the normal tail, common practice),
// and in the fine scan that is fitted.
const (
	searchSignificance = 5
	fitSignificance    = 8
)

// errNoPeak: the scan shows nothing to align on.
var errNoPeak = errors.New("no peak stands out of the background")

// outline is what a fit of a profile starts from: the background (the lower of the two ends), the peak height
// above it, the angles where the profile crosses half that height (interpolated between points), the step
// and the span of the scan.
type outline struct {
	bg, height, left, right, step, span float64
}

func (p profile) outline(significance float64) (outline, error) {
	n := len(p.y)
	if n < analysis.MinPoints {
		return outline{}, fmt.Errorf("%d points, need at least %d", n, analysis.MinPoints)
	}
	o := outline{bg: math.Min(p.y[0], p.y[n-1]), left: p.x[0], right: p.x[n-1], step: math.Abs(p.x[1] - p.x[0]), span: p.x[n-1] - p.x[0]}
	top := 0
	for i := range p.y {
		if p.y[i] > p.y[top] {
			top = i
		}
	}
	o.height = p.y[top] - o.bg
	if z := o.height / p.sigma[top]; !(z >= significance) {
		return o, fmt.Errorf("%w: the highest point is %.1f standard errors above the lower end of the scan", errNoPeak, z)
	}
	half := o.bg + o.height/2
	leftFound, rightFound := false, false
	for i := top; i > 0 && !leftFound; i-- {
		if p.y[i-1] < half {
			o.left, leftFound = p.x[i-1]+(half-p.y[i-1])/(p.y[i]-p.y[i-1])*(p.x[i]-p.x[i-1]), true
		}
	}
	for i := top; i < n-1 && !rightFound; i++ {
		if p.y[i+1] < half {
			o.right, rightFound = p.x[i]+(p.y[i]-half)/(p.y[i]-p.y[i+1])*(p.x[i+1]-p.x[i]), true
		}
	}
	if !leftFound || !rightFound {
		return o, fmt.Errorf("the peak near %.3f° is cut by the edge of the scan [%.3f°, %.3f°]; widen the search", p.x[top], p.x[0], p.x[n-1])
	}
	return o, nil
}

// fitDirectBeam fits the direct beam through the detector slit: a flat top of width w with edges blurred by a
// Gaussian of σ s (the slit convolved with the beam's divergence) on a constant background,
// f = b + A·[Φ((x − c + w/2)/s) − Φ((x − c − w/2)/s)]. The centre c is where the detector looks straight
// into the beam.
func fitDirectBeam(p profile) (peakFit, error) {
	o, err := p.outline(fitSignificance)
	if err != nil {
		return peakFit{}, err
	}
	model := func(x float64, q, grad []float64) float64 {
		c, w, s, a, b := q[0], q[1], q[2], q[3], q[4]
		u1, u2 := (x-c+w/2)/s, (x-c-w/2)/s
		g1, g2 := gauss(u1), gauss(u2)
		d := phi(u1) - phi(u2)
		grad[0] = a * (g2 - g1) / s
		grad[1] = a * (g1 + g2) / (2 * s)
		grad[2] = a * (u2*g2 - u1*g1) / s
		grad[3] = d
		grad[4] = 1
		return b + a*d
	}
	width := o.right - o.left
	start := []float64{(o.left + o.right) / 2, math.Max(width, o.step), math.Max(o.step, width/10), math.Max(o.height, 1), math.Max(o.bg, 0)}
	fit, err := analysis.LevenbergMarquardt(analysis.Problem{X: p.x, Y: p.y, Sigma: p.sigma, Model: model,
		Lower: []float64{p.x[0], 0, 1e-4, 0, 0}, Upper: []float64{p.x[len(p.x)-1], o.span, o.span, math.Inf(1), math.Inf(1)}}, start)
	if err != nil {
		return peakFit{}, err
	}
	return checked(fit, 4, fit.P[1]+2.3548*fit.P[2], p)
}

// fitRockingCurve fits a Gaussian on a constant background, f = b + A·exp(−(x − c)²/(2σ²)): the rocking curve
// of a mosaic crystal (common practice), centred on the Bragg angle of the reflection.
func fitRockingCurve(p profile) (peakFit, error) {
	o, err := p.outline(fitSignificance)
	if err != nil {
		return peakFit{}, err
	}
	model := func(x float64, q, grad []float64) float64 {
		c, s, a, b := q[0], q[1], q[2], q[3]
		u := (x - c) / s
		g := math.Exp(-u * u / 2)
		grad[0] = a * g * u / s
		grad[1] = a * g * u * u / s
		grad[2] = g
		grad[3] = 1
		return b + a*g
	}
	start := []float64{(o.left + o.right) / 2, math.Max((o.right-o.left)/2.3548, o.step), math.Max(o.height, 1), math.Max(o.bg, 0)}
	fit, err := analysis.LevenbergMarquardt(analysis.Problem{X: p.x, Y: p.y, Sigma: p.sigma, Model: model,
		Lower: []float64{p.x[0], o.step / 4, 0, 0}, Upper: []float64{p.x[len(p.x)-1], o.span, math.Inf(1), math.Inf(1)}}, start)
	if err != nil {
		return peakFit{}, err
	}
	return checked(fit, 3, 2.3548*fit.P[1], p)
}

// checked accepts a fit when some point stands above the fitted background (parameter bg) by fitSignificance
// of its standard errors, and the centre lies inside the scan, not on its edge. The test is on the data, not
// on a fitted height, which a narrow flat top shares with its width.
func checked(fit analysis.Fit, bg int, width float64, p profile) (peakFit, error) {
	c, b := fit.P[0], fit.P[bg]
	best := math.Inf(-1)
	for i := range p.y {
		best = math.Max(best, (p.y[i]-b)/p.sigma[i])
	}
	if !(best >= fitSignificance) {
		return peakFit{}, fmt.Errorf("%w: the highest point is %.1f standard errors above the background of %.3g counts/s", errNoPeak, best, b)
	}
	if lo, hi := p.x[0], p.x[len(p.x)-1]; c-lo < width/4 || hi-c < width/4 {
		return peakFit{}, fmt.Errorf("the peak at %.3f° lies on the edge of the scan [%.3f°, %.3f°]; widen the search", c, lo, hi)
	}
	return peakFit{Centre: c, Err: fit.ScaledErr(0), Width: width}, nil
}

// gauss is the standard normal density; phi its distribution function.
func gauss(u float64) float64 { return math.Exp(-u*u/2) / math.Sqrt(2*math.Pi) }

func phi(u float64) float64 { return 0.5 * math.Erfc(-u/math.Sqrt2) }
