package sim

import (
	"fmt"
	"math"
	"sort"
	"time"

	"goniod/driver"
)

// goniometer holds the two stepper-driven axes. A move runs at finite speed; the motor angle during it is
// interpolated, so a position read or a halt in mid-move sees where the axis really is.
type goniometer struct {
	axes  map[string]*axis
	step  float64 // motor step, degrees
	speed float64 // degrees per second
}

type axis struct {
	name   string
	lo, hi float64
	offset float64 // motor angle − true angle
	pos    float64 // motor angle at rest, or where the current move started
	move   *motion
}

type motion struct {
	to    float64
	start time.Time
	dur   time.Duration
}

func newGoniometer(cfg Config) goniometer {
	return goniometer{step: cfg.StepDeg, speed: cfg.AxisSpeedDegPerS, axes: map[string]*axis{
		AxisTheta:    {name: AxisTheta, lo: thetaMinDeg, hi: thetaMaxDeg, offset: cfg.ThetaOffsetDeg},
		AxisTwoTheta: {name: AxisTwoTheta, lo: twoThetaMinDeg, hi: twoThetaMaxDeg, offset: cfg.TwoThetaOffsetDeg},
	}}
}

// quantize rounds an angle to the nearest motor step.
func (g *goniometer) quantize(deg float64) float64 { return math.Round(deg/g.step) * g.step }

// at is an axis's motor angle at t, on the step grid.
func (g *goniometer) at(a *axis, t time.Time) float64 {
	if a.move == nil {
		return a.pos
	}
	el := t.Sub(a.move.start)
	if el >= a.move.dur {
		return a.move.to
	}
	frac := float64(el) / float64(a.move.dur)
	return g.quantize(a.pos + (a.move.to-a.pos)*frac)
}

// trueAngle is the angle the axis really has at t: motor angle minus zero offset.
func (g *goniometer) trueAngle(name string, t time.Time) float64 {
	a := g.axes[name]
	return g.at(a, t) - a.offset
}

// start checks every target against the axis limits and starts all moves together at t. It returns the
// moves' identities (to finish them later) and the duration of the longest.
func (g *goniometer) start(target map[string]float64, t time.Time) (map[string]*motion, time.Duration, error) {
	names := make([]string, 0, len(target))
	for name := range target {
		names = append(names, name)
	}
	sort.Strings(names)
	for _, name := range names {
		a, ok := g.axes[name]
		if !ok {
			return nil, 0, fmt.Errorf("%w %q", driver.ErrUnknownAxis, name)
		}
		if deg := target[name]; math.IsNaN(deg) || deg < a.lo || deg > a.hi {
			return nil, 0, fmt.Errorf("%w: %s %.4f° outside [%g°, %g°]", driver.ErrOutOfRange, name, deg, a.lo, a.hi)
		}
	}
	moves := make(map[string]*motion, len(target))
	var longest time.Duration
	for _, name := range names {
		a := g.axes[name]
		from := g.at(a, t)
		to := math.Min(math.Max(g.quantize(target[name]), a.lo), a.hi)
		m := &motion{to: to, start: t, dur: seconds(math.Abs(to-from) / g.speed)}
		a.pos, a.move = from, m
		moves[name] = m
		longest = max(longest, m.dur)
	}
	return moves, longest, nil
}

// finish ends the given moves at their targets, unless a later move or a stop replaced them.
func (g *goniometer) finish(moves map[string]*motion) map[string]float64 {
	got := make(map[string]float64, len(moves))
	for name, m := range moves {
		a := g.axes[name]
		if a.move == m {
			a.pos, a.move = m.to, nil
		}
		got[name] = a.pos
	}
	return got
}

// stop halts every axis where it is at t.
func (g *goniometer) stop(t time.Time) {
	for _, a := range g.axes {
		a.pos, a.move = g.at(a, t), nil
	}
}

// describe lists the axes for driver.Description.
func (g *goniometer) describe() []driver.AxisDescription {
	th, tt := g.axes[AxisTheta], g.axes[AxisTwoTheta]
	return []driver.AxisDescription{
		{Name: AxisTheta, MinDeg: th.lo, MaxDeg: th.hi, ResolutionDeg: g.step, Coupling: 1},
		{Name: AxisTwoTheta, MinDeg: tt.lo, MaxDeg: tt.hi, ResolutionDeg: g.step, Coupling: 2},
	}
}
