package analysis

import (
	"errors"
	"fmt"
	"math"
	"sort"

	"goniod/xray"
)

// ErrData marks input data the analysis cannot use (too few points, no change of angle, bad values).
var ErrData = errors.New("unusable data")

// DeadTime is the counter's dead time τ (seconds) and model; zero τ means no correction.
type DeadTime struct {
	Tau   float64
	Model xray.DeadTimeModel
}

// Scan is a step scan prepared for analysis: points sorted by angle, with the raw counts and dwell of each and
// the dead-time-corrected rate with its propagated Poisson error.
type Scan struct {
	X, Counts, Dwell []float64
	// Rate and RateErr are the dead-time-corrected (true) rate and its standard error, counts per second.
	Rate, RateErr []float64
	DeadTime      DeadTime
	// Saturated counts the points dropped because their observed rate is beyond what the dead-time model can
	// record.
	Saturated int
	step      float64
}

// MinPoints is the fewest points an analysis accepts.
const MinPoints = 5

// NewScan checks and prepares a scan from the angle (degrees), raw counts and dwell (seconds) of each point.
// Points come back sorted by angle; points whose rate saturates the dead-time model are dropped and counted.
func NewScan(x, counts, dwell []float64, dt DeadTime) (*Scan, error) {
	if len(counts) != len(x) || len(dwell) != len(x) {
		return nil, fmt.Errorf("%w: %d angles, %d counts, %d dwells", ErrData, len(x), len(counts), len(dwell))
	}
	if !(dt.Tau >= 0) || dt.Tau > 0.01 {
		return nil, fmt.Errorf("%w: dead time %g s is outside [0, 0.01] s", ErrData, dt.Tau)
	}
	idx := make([]int, len(x))
	for i := range x {
		switch {
		case math.IsNaN(x[i]) || math.IsInf(x[i], 0):
			return nil, fmt.Errorf("%w: point %d: angle %v is not a finite number", ErrData, i, x[i])
		case !(counts[i] >= 0) || math.IsInf(counts[i], 0):
			return nil, fmt.Errorf("%w: point %d: counts %v must be a finite number ≥ 0", ErrData, i, counts[i])
		case !(dwell[i] > 0) || math.IsInf(dwell[i], 0):
			return nil, fmt.Errorf("%w: point %d: dwell %v s must be > 0", ErrData, i, dwell[i])
		}
		idx[i] = i
	}
	sort.SliceStable(idx, func(a, b int) bool { return x[idx[a]] < x[idx[b]] })
	s := &Scan{DeadTime: dt}
	for _, i := range idx {
		obs := xray.Rate{CPS: counts[i] / dwell[i], Err: math.Sqrt(counts[i]) / dwell[i]}
		tr, err := xray.TrueRate(obs, dt.Tau, dt.Model)
		if err != nil || math.IsInf(tr.CPS, 0) {
			s.Saturated++
			continue
		}
		s.X = append(s.X, x[i])
		s.Counts = append(s.Counts, counts[i])
		s.Dwell = append(s.Dwell, dwell[i])
		s.Rate = append(s.Rate, tr.CPS)
		s.RateErr = append(s.RateErr, tr.Err)
	}
	if len(s.X) < MinPoints {
		return nil, fmt.Errorf("%w: %d usable points, need at least %d", ErrData, len(s.X), MinPoints)
	}
	if s.X[len(s.X)-1] == s.X[0] {
		return nil, fmt.Errorf("%w: the angle does not change over the scan", ErrData)
	}
	d := make([]float64, 0, len(s.X)-1)
	for i := 1; i < len(s.X); i++ {
		if dx := s.X[i] - s.X[i-1]; dx > 0 {
			d = append(d, dx)
		}
	}
	sort.Float64s(d)
	s.step = d[len(d)/2]
	return s, nil
}

// Len is the number of points.
func (s *Scan) Len() int { return len(s.X) }

// Step is the median spacing of the angles, degrees.
func (s *Scan) Step() float64 { return s.step }

// observed converts a true rate to the rate the counter records.
func (s *Scan) observed(trueRate float64) float64 {
	return xray.ObservedRate(trueRate, s.DeadTime.Tau, s.DeadTime.Model)
}

// trueOf converts an observed rate to the true rate (the observed one when it saturates the model).
func (s *Scan) trueOf(observed float64) float64 {
	tr, err := xray.TrueRate(xray.Rate{CPS: observed}, s.DeadTime.Tau, s.DeadTime.Model)
	if err != nil {
		return observed
	}
	return tr.CPS
}

// minVarCounts is the smallest variance (in counts) a point is given in a fit: Poisson weights from a model
// that predicts nearly nothing would otherwise give single counts an unbounded weight.
const minVarCounts = 0.5

// sigmaAt is the standard error of the true rate at point i when the true rate is n: the Poisson variance of
// the expected counts, propagated through the dead-time correction (Knoll, 4th ed., ch. 4).
func (s *Scan) sigmaAt(i int, n float64) float64 {
	t, tau := s.Dwell[i], s.DeadTime.Tau
	n = math.Max(n, 0)
	m := s.observed(n)
	sm := math.Sqrt(math.Max(m*t, minVarCounts)) / t
	if tau <= 0 {
		return sm
	}
	var dndm float64
	if s.DeadTime.Model == xray.Paralyzable {
		dndm = math.Exp(n*tau) / math.Max(1-n*tau, 0.05)
	} else {
		dndm = 1 / math.Pow(math.Max(1-m*tau, 0.05), 2)
	}
	return sm * dndm
}

// dataSigma is the standard error of point i from its own counts (one count when it has none).
func (s *Scan) dataSigma(i int) float64 {
	if s.Counts[i] >= 1 {
		return s.RateErr[i]
	}
	return s.sigmaAt(i, 1/s.Dwell[i])
}
