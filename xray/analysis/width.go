package analysis

import (
	"errors"
	"fmt"
	"math"
	"sort"
)

// ErrNoPeak is returned when a measurement needs a peak and the search found none.
var ErrNoPeak = errors.New("no peak found")

// Width is the width of the strongest peak of a scan (a rocking curve), by fit and by interpolation.
type Width struct {
	Peak Peak
	// FWHMFit is the fitted profile's FWHM; FWHMInterp the distance between the half-maximum crossings of the
	// background-subtracted data, found by linear interpolation between neighbouring points.
	FWHMFit, FWHMInterp Value
	// Peaks found (the measured one is the strongest).
	Found int
}

// MeasureWidth finds the peaks of a scan and measures the strongest (largest area). The interpolated width
// takes its half-maximum level from a parabola through the three highest points; its error propagates the
// Poisson errors of the points that set it (the fitted background is taken as exact).
func MeasureWidth(s *Scan, o PeakOptions) (Width, error) {
	ps, err := FindPeaks(s, o)
	if err != nil {
		return Width{}, err
	}
	if len(ps.Peaks) == 0 {
		return Width{}, fmt.Errorf("%w at %g σ in %d points", ErrNoPeak, significanceOr(o.Significance), s.Len())
	}
	best := ps.Peaks[0]
	for _, p := range ps.Peaks {
		if p.Area.Value > best.Area.Value {
			best = p
		}
	}
	out := Width{Peak: best, FWHMFit: best.FWHM, Found: len(ps.Peaks)}
	ex := make([]float64, s.Len())
	for i, x := range s.X {
		ex[i] = s.Rate[i] - best.Background - best.bgSlope*(x-best.Centre.Value)
	}
	c := best.Centre.Value
	lo := sort.SearchFloat64s(s.X, c-best.FWHM.Value)
	hi := min(sort.SearchFloat64s(s.X, c+best.FWHM.Value), s.Len()-1)
	top := lo
	for i := lo; i <= hi; i++ {
		if ex[i] > ex[top] {
			top = i
		}
	}
	w, ok := interpWidth(s.X, ex, top)
	if !ok {
		return out, fmt.Errorf("%w: the peak at %.4f° does not fall to half maximum on both sides within the scan", ErrData, c)
	}
	var v float64
	jlo := sort.SearchFloat64s(s.X, c-2*w)
	jhi := min(sort.SearchFloat64s(s.X, c+2*w), s.Len()-1)
	for j := jlo; j <= jhi; j++ {
		h := 1e-3 * s.RateErr[j]
		if h == 0 {
			h = 1e-3 * s.dataSigma(j)
		}
		keep := ex[j]
		ex[j] = keep + h
		wp, okp := interpWidth(s.X, ex, top)
		ex[j] = keep - h
		wm, okm := interpWidth(s.X, ex, top)
		ex[j] = keep
		if okp && okm && wp != wm {
			g := (wp - wm) / (2 * h)
			sj := s.dataSigma(j)
			v += g * g * sj * sj
		}
	}
	out.FWHMInterp = Value{w, math.Sqrt(v)}
	return out, nil
}

func significanceOr(k float64) float64 {
	if k == 0 {
		return DefaultSignificance
	}
	return k
}

// interpWidth is the full width at half maximum of ex around index top by linear interpolation.
func interpWidth(x, ex []float64, top int) (float64, bool) {
	h := ex[top]
	if top > 0 && top+1 < len(ex) {
		a, b, c := ex[top-1], ex[top], ex[top+1]
		if den := a - 2*b + c; den < 0 {
			h = b - (a-c)*(a-c)/(8*den)
		}
	}
	if !(h > 0) {
		return 0, false
	}
	half := h / 2
	cross := func(dir int) (float64, bool) {
		for j := top + dir; j >= 0 && j < len(ex); j += dir {
			if ex[j] <= half {
				p := j - dir
				return x[p] + (ex[p]-half)/(ex[p]-ex[j])*(x[j]-x[p]), true
			}
		}
		return 0, false
	}
	l, okl := cross(-1)
	r, okr := cross(1)
	return r - l, okl && okr
}
