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

// minSignificance is how many standard errors a fitted peak's height must have to count as found.
const minSignificance = 10

// errNoPeak: the scan shows nothing to align on.
var errNoPeak = errors.New("no peak stands out of the background")

// halfMax returns the background (lowest of the two ends), the peak height above it, and the angles where the
// profile crosses half that height, interpolated between points.
func (p profile) halfMax() (bg, height, left, right float64) {
	n := len(p.y)
	bg = math.Min(p.y[0], p.y[n-1])
	top := 0
	for i := range p.y {
		if p.y[i] > p.y[top] {
			top = i
		}
	}
	height = p.y[top] - bg
	half := bg + height/2
	left, right = p.x[0], p.x[n-1]
	for i := top; i > 0; i-- {
		if p.y[i-1] < half {
			left = p.x[i-1] + (half-p.y[i-1])/(p.y[i]-p.y[i-1])*(p.x[i]-p.x[i-1])
			break
		}
	}
	for i := top; i < n-1; i++ {
		if p.y[i+1] < half {
			right = p.x[i] + (p.y[i]-half)/(p.y[i]-p.y[i+1])*(p.x[i+1]-p.x[i])
			break
		}
	}
	return bg, height, left, right
}

// fitDirectBeam fits the direct beam through the detector slit: a flat top of width w with edges blurred by a
// Gaussian of σ s (the slit convolved with the beam's divergence) on a constant background,
// f = b + A·[Φ((x − c + w/2)/s) − Φ((x − c − w/2)/s)]. The centre c is where the detector looks straight
// into the beam.
func fitDirectBeam(p profile) (peakFit, error) {
	if len(p.x) < analysis.MinPoints {
		return peakFit{}, fmt.Errorf("%d points, need at least %d", len(p.x), analysis.MinPoints)
	}
	bg, height, left, right := p.halfMax()
	step := math.Abs(p.x[1] - p.x[0])
	span := p.x[len(p.x)-1] - p.x[0]
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
	start := []float64{(left + right) / 2, math.Max(right-left, step), math.Max(step, (right-left)/10), math.Max(height, 1), math.Max(bg, 0)}
	fit, err := analysis.LevenbergMarquardt(analysis.Problem{X: p.x, Y: p.y, Sigma: p.sigma, Model: model,
		Lower: []float64{p.x[0], 0, 1e-4, 0, 0}, Upper: []float64{p.x[len(p.x)-1], span, span, math.Inf(1), math.Inf(1)}}, start)
	if err != nil {
		return peakFit{}, fmt.Errorf("fit: %w", err)
	}
	return checked(fit, 3, fit.P[1]+2.3548*fit.P[2], p)
}

// fitRockingCurve fits a Gaussian on a constant background, f = b + A·exp(−(x − c)²/(2σ²)): the rocking curve
// of a mosaic crystal (common practice), centred on the Bragg angle of the reflection.
func fitRockingCurve(p profile) (peakFit, error) {
	if len(p.x) < analysis.MinPoints {
		return peakFit{}, fmt.Errorf("%d points, need at least %d", len(p.x), analysis.MinPoints)
	}
	bg, height, left, right := p.halfMax()
	step := math.Abs(p.x[1] - p.x[0])
	span := p.x[len(p.x)-1] - p.x[0]
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
	start := []float64{(left + right) / 2, math.Max((right-left)/2.3548, step), math.Max(height, 1), math.Max(bg, 0)}
	fit, err := analysis.LevenbergMarquardt(analysis.Problem{X: p.x, Y: p.y, Sigma: p.sigma, Model: model,
		Lower: []float64{p.x[0], step / 4, 0, 0}, Upper: []float64{p.x[len(p.x)-1], span, math.Inf(1), math.Inf(1)}}, start)
	if err != nil {
		return peakFit{}, fmt.Errorf("fit: %w", err)
	}
	return checked(fit, 2, 2.3548*fit.P[1], p)
}

// checked accepts a fit whose height (parameter k) stands out by minSignificance standard errors and whose
// centre lies inside the scan, not on its edge.
func checked(fit analysis.Fit, k int, width float64, p profile) (peakFit, error) {
	c, a := fit.P[0], fit.P[k]
	if errA := fit.ScaledErr(k); !(a > minSignificance*errA) {
		return peakFit{}, fmt.Errorf("%w (height %.3g ± %.2g counts/s)", errNoPeak, a, errA)
	}
	if lo, hi := p.x[0], p.x[len(p.x)-1]; c-lo < width/4 || hi-c < width/4 {
		return peakFit{}, fmt.Errorf("the peak at %.3f° lies on the edge of the scan [%.3f°, %.3f°]; widen the search", c, lo, hi)
	}
	return peakFit{Centre: c, Err: fit.ScaledErr(0), Width: width}, nil
}

// gauss is the standard normal density; phi its distribution function.
func gauss(u float64) float64 { return math.Exp(-u*u/2) / math.Sqrt(2*math.Pi) }

func phi(u float64) float64 { return 0.5 * math.Erfc(-u/math.Sqrt2) }
