package sim

import (
	"context"
	"fmt"
	"math"
	"time"

	"goniod/driver"
)

// SetSource sets tube voltage and current within the tube's rating. With high voltage on, the output ramps
// to the new setting.
func (in *Instrument) SetSource(_ context.Context, kv, ma float64) error {
	in.touch()
	c := in.cfg
	if math.IsNaN(kv) || kv < 0 || kv > c.MaxKV {
		return fmt.Errorf("%w: tube voltage %g kV outside [0, %g] kV", driver.ErrOutOfRange, kv, c.MaxKV)
	}
	if math.IsNaN(ma) || ma < 0 || ma > c.MaxMA {
		return fmt.Errorf("%w: tube current %g mA outside [0, %g] mA", driver.ErrOutOfRange, ma, c.MaxMA)
	}
	if kv*ma > c.MaxPowerW {
		return fmt.Errorf("%w: tube power %g W (%g kV × %g mA) above the rating %g W", driver.ErrOutOfRange, kv*ma, kv, ma, c.MaxPowerW)
	}
	in.mu.Lock()
	defer in.mu.Unlock()
	sp := in.tube.setpoint()
	in.tube.set(in.clock.Now(), kv, ma, sp.on)
	return nil
}

// SetHighVoltage switches the tube on or off; on is refused while the door is open. The output ramps up over
// the configured ramp time and drops at once.
func (in *Instrument) SetHighVoltage(_ context.Context, on bool) error {
	in.touch()
	in.mu.Lock()
	defer in.mu.Unlock()
	if on && in.door {
		return driver.ErrInterlockOpen
	}
	sp := in.tube.setpoint()
	if sp.on != on {
		in.tube.set(in.clock.Now(), sp.kv, sp.ma, on)
	}
	return nil
}

// SourceState reports the tube's setpoint and whether high voltage is on.
func (in *Instrument) SourceState(context.Context) (driver.SourceState, error) {
	in.touch()
	in.mu.Lock()
	defer in.mu.Unlock()
	sp := in.tube.setpoint()
	return driver.SourceState{KV: sp.kv, MA: sp.ma, HighVoltage: sp.on}, nil
}

// InterlockClosed reports the door.
func (in *Instrument) InterlockClosed(context.Context) (bool, error) {
	in.touch()
	in.mu.Lock()
	defer in.mu.Unlock()
	return !in.door, nil
}

// Status reads high voltage and the interlock together.
func (in *Instrument) Status(context.Context) (driver.Status, error) {
	in.touch()
	in.mu.Lock()
	defer in.mu.Unlock()
	return driver.Status{HighVoltage: in.tube.setpoint().on, InterlockClosed: !in.door}, nil
}

// Feed feeds the host watchdog.
func (in *Instrument) Feed(context.Context) error {
	in.touch()
	return nil
}

// WatchdogTime is the host silence after which high voltage goes off (zero or negative: no watchdog), in host
// (wall) time.
func (in *Instrument) WatchdogTime() time.Duration { return in.cfg.Watchdog }

// WatchdogPeriod is a third of the watchdog time. Both are host (wall) time, whatever the clock's speed.
func (in *Instrument) WatchdogPeriod() time.Duration {
	if in.cfg.Watchdog <= 0 {
		return time.Minute
	}
	return in.cfg.Watchdog / 3
}

// Count gates the counter for gate (simulated time) and returns the counts the Geiger–Müller tube recorded:
// Poisson events at the rate the geometry and the tube output give, less those lost in its dead time. The
// angles are those at the start of the gate; the tube output is followed through the gate.
func (in *Instrument) Count(ctx context.Context, gate time.Duration) (driver.Counts, error) {
	if gate < 0 {
		return driver.Counts{}, fmt.Errorf("%w: gate %v is negative", driver.ErrOutOfRange, gate)
	}
	end := in.begin()
	defer end()
	in.mu.Lock()
	start := in.clock.Now()
	theta := in.gonio.trueAngle(AxisTheta, start)
	twoTheta := in.gonio.trueAngle(AxisTwoTheta, start)
	in.mu.Unlock()
	if err := in.sleep(ctx, gate); err != nil {
		return driver.Counts{}, fmt.Errorf("count: %w", err)
	}
	in.mu.Lock()
	defer in.mu.Unlock()
	tubeSegs := in.tube.segments(start, start.Add(gate))
	segs := make([]rateSegment, len(tubeSegs))
	for i, s := range tubeSegs {
		segs[i] = rateSegment{seconds: s.seconds, rate: in.rateLocked(theta, twoTheta, s.kv, s.ma)}
	}
	n := in.counter.count(in.rng, segs)
	return driver.Counts{Channels: []uint64{n}, Gate: gate}, nil
}
