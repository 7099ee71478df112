package sim

import (
	"math"
	"time"
)

// tube is the high-voltage supply as a timeline: every change of setpoint or of high voltage is an event at a
// simulated instant, and the output at any instant follows from them. Output ramps toward the setpoint at a
// finite slew rate while high voltage is on and drops to zero at once when it goes off. A count integrates
// over the output during its gate, so a ramp, a door opened mid-gate or a watchdog trip shows in the counts.
type tube struct {
	slewKV, slewMA float64 // per second; +Inf ramps at once
	base           tubeState
	events         []tubeEvent // after base, in time order
}

// tubeEvent is a change of the supply at an instant: the setpoint and high voltage from then on.
type tubeEvent struct {
	at     time.Time
	kv, ma float64
	on     bool
}

// tubeState is the supply at an instant: output and setpoint.
type tubeState struct {
	at           time.Time
	kv, ma       float64 // output
	setKV, setMA float64
	on           bool
}

// tubeSegment is a stretch of a gate with constant output.
type tubeSegment struct {
	seconds float64
	kv, ma  float64
}

// keepEvents is how far back the timeline stays exact; older events are folded into the base state.
const keepEvents = time.Hour

// rampSlices is the number of constant-output pieces a ramp is cut into when a gate overlaps it.
const rampSlices = 8

func newTube(start time.Time, kv, ma, slewKV, slewMA float64) *tube {
	return &tube{slewKV: slewKV, slewMA: slewMA, base: tubeState{at: start, setKV: kv, setMA: ma}}
}

// setpoint is the latest setpoint and high-voltage state.
func (tb *tube) setpoint() tubeEvent {
	if n := len(tb.events); n > 0 {
		return tb.events[n-1]
	}
	return tubeEvent{at: tb.base.at, kv: tb.base.setKV, ma: tb.base.setMA, on: tb.base.on}
}

// set records a change at t. A t before the latest event is moved to it, keeping the timeline in order.
func (tb *tube) set(t time.Time, kv, ma float64, on bool) {
	if last := tb.setpoint(); t.Before(last.at) {
		t = last.at
	}
	tb.events = append(tb.events, tubeEvent{at: t, kv: kv, ma: ma, on: on})
	cutoff := t.Add(-keepEvents)
	i := 0
	for ; i < len(tb.events) && tb.events[i].at.Before(cutoff); i++ {
		tb.base = apply(tb.advance(tb.base, tb.events[i].at), tb.events[i])
	}
	tb.events = tb.events[i:]
}

func apply(s tubeState, e tubeEvent) tubeState {
	s.setKV, s.setMA, s.on = e.kv, e.ma, e.on
	if !e.on {
		s.kv, s.ma = 0, 0
	}
	return s
}

// approach moves x toward target by at most step.
func approach(x, target, step float64) float64 {
	if math.Abs(target-x) <= step {
		return target
	}
	if target > x {
		return x + step
	}
	return x - step
}

// advance lets the output follow the setpoint from s.at to t with no event between.
func (tb *tube) advance(s tubeState, t time.Time) tubeState {
	if !t.After(s.at) {
		return s
	}
	dt := t.Sub(s.at).Seconds()
	if s.on {
		s.kv = approach(s.kv, s.setKV, tb.slewKV*dt)
		s.ma = approach(s.ma, s.setMA, tb.slewMA*dt)
	} else {
		s.kv, s.ma = 0, 0
	}
	s.at = t
	return s
}

// stateAt is the supply at instant t (not before the base state).
func (tb *tube) stateAt(t time.Time) tubeState {
	s := tb.base
	for _, e := range tb.events {
		if e.at.After(t) {
			break
		}
		s = apply(tb.advance(s, e.at), e)
	}
	return tb.advance(s, t)
}

// segments cuts the interval [a, b] into stretches of constant output; ramps become rampSlices pieces, each
// at its midpoint output.
func (tb *tube) segments(a, b time.Time) []tubeSegment {
	var out []tubeSegment
	s := tb.stateAt(a)
	for _, e := range tb.events {
		if !e.at.After(a) {
			continue
		}
		if !e.at.Before(b) {
			break
		}
		out = tb.appendRun(out, s, e.at)
		s = apply(tb.advance(s, e.at), e)
	}
	return tb.appendRun(out, s, b)
}

// appendRun appends the stretch from s.at to end, during which no event happens.
func (tb *tube) appendRun(out []tubeSegment, s tubeState, end time.Time) []tubeSegment {
	total := end.Sub(s.at).Seconds()
	if total <= 0 {
		return out
	}
	if !s.on {
		return append(out, tubeSegment{seconds: total})
	}
	ramp := math.Max(math.Abs(s.setKV-s.kv)/tb.slewKV, math.Abs(s.setMA-s.ma)/tb.slewMA)
	if ramp > 0 {
		ramp = math.Min(ramp, total)
		piece := ramp / rampSlices
		for i := range rampSlices {
			mid := tb.advance(s, s.at.Add(seconds(piece*(float64(i)+0.5))))
			out = append(out, tubeSegment{seconds: piece, kv: mid.kv, ma: mid.ma})
		}
		s = tb.advance(s, s.at.Add(seconds(ramp)))
	}
	if rest := total - ramp; rest > 0 {
		out = append(out, tubeSegment{seconds: rest, kv: s.kv, ma: s.ma})
	}
	return out
}

func seconds(s float64) time.Duration { return time.Duration(s * float64(time.Second)) }
