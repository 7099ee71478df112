package sim

import (
	"context"
	"errors"
	"math"
	"slices"
	"strings"
	"sync"
	"testing"
	"time"

	"goniod/driver"
	"goniod/xray"
)

// hookClock is a manual clock that runs hook halfway through the next Sleep, to act in mid-gate or mid-move.
type hookClock struct {
	*ManualClock
	mu   sync.Mutex
	hook func()
}

func (c *hookClock) Sleep(ctx context.Context, d time.Duration) error {
	c.mu.Lock()
	hook := c.hook
	c.hook = nil
	c.mu.Unlock()
	if hook == nil {
		return c.ManualClock.Sleep(ctx, d)
	}
	c.Advance(d / 2)
	hook()
	return c.ManualClock.Sleep(ctx, d-d/2)
}

func (c *hookClock) onNextSleep(f func()) {
	c.mu.Lock()
	defer c.mu.Unlock()
	c.hook = f
}

func TestInterlock(t *testing.T) {
	ctx := context.Background()
	b := newBench(t, Config{}, 30, 1)
	b.in.SetDoor(true)
	if st, _ := b.in.SourceState(ctx); st.HighVoltage {
		t.Error("high voltage still on with the door open")
	}
	if s := b.in.State(); s.OffReason != "interlock" || !s.DoorOpen {
		t.Errorf("state after opening the door: %+v", s)
	}
	if err := b.in.SetHighVoltage(ctx, true); !errors.Is(err, driver.ErrInterlockOpen) {
		t.Errorf("switching on with the door open: %v, want ErrInterlockOpen", err)
	}
	if closed, _ := b.in.InterlockClosed(ctx); closed {
		t.Error("InterlockClosed true with the door open")
	}
	b.in.SetDoor(false)
	if st, _ := b.in.Status(ctx); st.HighVoltage || !st.InterlockClosed {
		t.Errorf("after closing the door: %+v; high voltage must stay off until asked", st)
	}
	if err := b.in.SetHighVoltage(ctx, true); err != nil {
		t.Errorf("switching on with the door closed: %v", err)
	}
}

func TestDoorOpenedMidGate(t *testing.T) {
	// Opening the door halfway through a 20 s gate leaves the counts of the first 10 s (Poisson, 5σ).
	clock := &hookClock{ManualClock: NewManualClock(epoch)}
	in, err := New(Config{Seed: 2}, clock)
	if err != nil {
		t.Fatal(err)
	}
	b := &bench{t: t, in: in}
	ctx := context.Background()
	if err := in.SetSource(ctx, 30, 1); err != nil {
		t.Fatal(err)
	}
	if err := in.SetHighVoltage(ctx, true); err != nil {
		t.Fatal(err)
	}
	clock.Advance(2 * time.Second)
	b.at(13, 26)
	full := b.count(20 * time.Second)
	clock.onNextSleep(func() { in.SetDoor(true) })
	half := b.count(20 * time.Second)
	if want := full / 2; math.Abs(half-want) > 5*math.Sqrt(want) {
		t.Errorf("door opened mid-gate: %g counts, want about %g (full gate %g)", half, want, full)
	}
}

func TestWatchdog(t *testing.T) {
	ctx := context.Background()
	b := newBench(t, Config{Watchdog: 10 * time.Second}, 30, 1)
	// Fed every 5 s, high voltage stays on for a minute.
	for range 12 {
		b.clock.Advance(5 * time.Second)
		if err := b.in.Feed(ctx); err != nil {
			t.Fatal(err)
		}
	}
	// A count longer than the watchdog time is host activity throughout.
	b.at(13, 26)
	b.count(30 * time.Second)
	if !b.in.State().HighVoltage {
		t.Fatal("high voltage went off during a 30 s count")
	}
	b.clock.Advance(9 * time.Second)
	if s := b.in.State(); !s.HighVoltage || s.HostSilentFor != 9*time.Second {
		t.Fatalf("after 9 s of silence: %+v", s)
	}
	b.clock.Advance(2 * time.Second)
	if s := b.in.State(); s.HighVoltage || s.OffReason != "watchdog" {
		t.Errorf("after 11 s of silence: high voltage %v, reason %q; want off by the watchdog", s.HighVoltage, s.OffReason)
	}
	// A count after the trip sees no tube.
	if got := b.count(10 * time.Second); got > 30 {
		t.Errorf("counts after the watchdog trip: %g, want background only", got)
	}
	if err := b.in.SetHighVoltage(ctx, true); err != nil || !b.in.State().HighVoltage {
		t.Errorf("switching on again after a watchdog trip: %v", err)
	}
}

func TestWatchdogOff(t *testing.T) {
	b := newBench(t, Config{Watchdog: -1}, 30, 1)
	b.clock.Advance(24 * time.Hour)
	if !b.in.State().HighVoltage {
		t.Error("high voltage went off with the watchdog disabled")
	}
}

func TestHighVoltageRamp(t *testing.T) {
	// Default ramp: 1 s from zero to the full rating (35 kV, 1 mA).
	clock := NewManualClock(epoch)
	in, err := New(Config{Seed: 4}, clock)
	if err != nil {
		t.Fatal(err)
	}
	ctx := context.Background()
	if err := in.SetSource(ctx, 30, 1); err != nil {
		t.Fatal(err)
	}
	if s := in.State(); s.HighVoltage || s.OutputKV != 0 {
		t.Fatalf("high voltage on at power-up: %+v", s)
	}
	if err := in.SetHighVoltage(ctx, true); err != nil {
		t.Fatal(err)
	}
	clock.Advance(500 * time.Millisecond)
	if s := in.State(); !within(s.OutputKV, 17.5, 1e-9) || !within(s.OutputMA, 0.5, 1e-9) {
		t.Errorf("0.5 s into the ramp: %.2f kV, %.2f mA; want 17.5 kV, 0.5 mA", s.OutputKV, s.OutputMA)
	}
	clock.Advance(500 * time.Millisecond)
	if s := in.State(); !within(s.OutputKV, 30, 1e-9) || !within(s.OutputMA, 1, 1e-9) {
		t.Errorf("after the ramp: %.2f kV, %.2f mA; want 30 kV, 1 mA", s.OutputKV, s.OutputMA)
	}
	if err := in.SetHighVoltage(ctx, false); err != nil {
		t.Fatal(err)
	}
	if s := in.State(); s.OutputKV != 0 || s.OffReason != "" {
		t.Errorf("after switching off: %+v", s)
	}
}

func TestRampShowsInCounts(t *testing.T) {
	// Counting from the instant high voltage goes on includes the ramp: the first 1 s gate at the Kα peak
	// collects well under a steady 1 s gate.
	clock := NewManualClock(epoch)
	in, _ := New(Config{Seed: 8}, clock)
	b := &bench{t: t, in: in, clock: clock}
	ctx := context.Background()
	th := braggDeg(t, "Cu", "Kα1", "LiF", 1)
	b.at(th, 2*th)
	if err := in.SetSource(ctx, 30, 1); err != nil {
		t.Fatal(err)
	}
	if err := in.SetHighVoltage(ctx, true); err != nil {
		t.Fatal(err)
	}
	first := b.count(time.Second)
	steady := b.count(time.Second)
	if first > 0.7*steady {
		t.Errorf("first second of the ramp: %g counts, steady %g", first, steady)
	}
}

func TestSourceLimits(t *testing.T) {
	ctx := context.Background()
	in, _ := New(Config{}, NewManualClock(epoch))
	for _, c := range []struct {
		kv, ma float64
		field  string
	}{{36, 0.5, "voltage"}, {-1, 0.5, "voltage"}, {math.NaN(), 0.5, "voltage"}, {20, 1.5, "current"}, {30, math.Inf(1), "current"}} {
		err := in.SetSource(ctx, c.kv, c.ma)
		if !errors.Is(err, driver.ErrOutOfRange) || !strings.Contains(err.Error(), c.field) {
			t.Errorf("SetSource(%g kV, %g mA) = %v, want ErrOutOfRange naming the %s", c.kv, c.ma, err, c.field)
		}
	}
	in, _ = New(Config{MaxPowerW: 20}, NewManualClock(epoch))
	if err := in.SetSource(ctx, 30, 0.8); !errors.Is(err, driver.ErrOutOfRange) || !strings.Contains(err.Error(), "power") {
		t.Errorf("24 W on a 20 W tube: %v, want ErrOutOfRange naming the power", err)
	}
	if st, _ := in.SourceState(ctx); st.KV != initialKV || st.MA != initialMA {
		t.Errorf("a refused setting changed the tube: %+v", st)
	}
}

func TestMotion(t *testing.T) {
	ctx := context.Background()
	clock := NewManualClock(epoch)
	in, _ := New(Config{StepDeg: 0.01, AxisSpeedDegPerS: 5}, clock)
	got, err := in.Move(ctx, AxisTheta, 20.004)
	if err != nil || !within(got, 20.00, 1e-9) {
		t.Errorf("Move to 20.004° with 0.01° steps: %g, %v; want 20.00°", got, err)
	}
	// Moving 20° at 5°/s takes 4 s of simulated time; both axes of a MoveAll move together.
	if d := clock.Now().Sub(epoch); d != 4*time.Second {
		t.Errorf("move of 20° at 5°/s took %v", d)
	}
	t0 := clock.Now()
	if _, err := in.MoveAll(ctx, map[string]float64{AxisTheta: 25, AxisTwoTheta: 30}); err != nil {
		t.Fatal(err)
	}
	if d := clock.Now().Sub(t0); d != 6*time.Second {
		t.Errorf("MoveAll of 5° and 30° at 5°/s took %v, want 6 s", d)
	}
	for _, c := range []struct {
		axis string
		deg  float64
		want error
	}{
		{AxisTheta, 100.5, driver.ErrOutOfRange}, {AxisTwoTheta, -11, driver.ErrOutOfRange},
		{AxisTheta, math.NaN(), driver.ErrOutOfRange}, {"chi", 1, driver.ErrUnknownAxis},
	} {
		if _, err := in.Move(ctx, c.axis, c.deg); !errors.Is(err, c.want) || !strings.Contains(err.Error(), c.axis) {
			t.Errorf("Move(%s, %g) = %v, want %v naming the axis", c.axis, c.deg, err, c.want)
		}
	}
	if p, _ := in.Position(ctx, AxisTwoTheta); !within(p, 30, 1e-9) {
		t.Errorf("a refused move changed 2θ to %g", p)
	}
}

func TestHaltMidMove(t *testing.T) {
	ctx := context.Background()
	clock := &hookClock{ManualClock: NewManualClock(epoch)}
	in, _ := New(Config{AxisSpeedDegPerS: 10}, clock)
	if err := in.SetHighVoltage(ctx, true); err != nil {
		t.Fatal(err)
	}
	clock.onNextSleep(func() {
		if s := in.State(); !s.Moving[AxisTheta] || !within(s.MotorDeg[AxisTheta], 20, 1e-9) {
			t.Errorf("halfway: %+v", s)
		}
		if err := in.Halt(); err != nil {
			t.Error(err)
		}
	})
	_, err := in.Move(ctx, AxisTheta, 40)
	if !errors.Is(err, ErrHalted) {
		t.Errorf("Move cut by Halt: %v, want ErrHalted", err)
	}
	s := in.State()
	if !within(s.MotorDeg[AxisTheta], 20, 1e-9) || s.Moving[AxisTheta] || s.HighVoltage || s.OffReason != "halt" {
		t.Errorf("after Halt: %+v; want θ stopped at 20°, high voltage off", s)
	}
	// The instrument works again after a halt.
	if got, err := in.Move(ctx, AxisTheta, 25); err != nil || got != 25 {
		t.Errorf("Move after Halt: %g, %v", got, err)
	}
}

func TestCancelledCount(t *testing.T) {
	in, _ := New(Config{}, NewManualClock(epoch))
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	if _, err := in.Count(ctx, time.Second); !errors.Is(err, context.Canceled) {
		t.Errorf("Count with a cancelled context: %v", err)
	}
	if _, err := in.Count(context.Background(), -time.Second); !errors.Is(err, driver.ErrOutOfRange) {
		t.Errorf("Count with a negative gate: %v", err)
	}
}

func TestScaledClockDwell(t *testing.T) {
	// At speed 1000 a 10 s dwell passes in about 10 ms of wall time, and the counts are those of 10 s.
	in, err := New(Config{Speed: 1000, Seed: 6}, nil)
	if err != nil {
		t.Fatal(err)
	}
	ctx := context.Background()
	if _, err := in.MoveAll(ctx, map[string]float64{AxisTheta: 13, AxisTwoTheta: 26}); err != nil {
		t.Fatal(err)
	}
	if err := in.SetSource(ctx, 30, 1); err != nil {
		t.Fatal(err)
	}
	if err := in.SetHighVoltage(ctx, true); err != nil {
		t.Fatal(err)
	}
	if err := in.Wait(ctx, 2*time.Second); err != nil {
		t.Fatal(err)
	}
	wall := time.Now()
	c, err := in.Count(ctx, 10*time.Second)
	if err != nil {
		t.Fatal(err)
	}
	elapsed := time.Since(wall)
	want := xray.ObservedRate(in.model.rate(13, 26, 30, 1), in.cfg.DeadTime.Seconds(), xray.NonParalyzable) * 10
	t.Logf("10 s dwell at speed 1000: %v wall, %d counts (expected %.0f)", elapsed, c.Channels[0], want)
	if elapsed > 5*time.Second {
		t.Errorf("10 s dwell at speed 1000 took %v of wall time", elapsed)
	}
	if got := float64(c.Channels[0]); math.Abs(got-want) > 5*math.Sqrt(want) {
		t.Errorf("counts %g, want those of 10 s: %.0f", got, want)
	}
	if p := in.WatchdogPeriod(); p != 10*time.Second/3 {
		t.Errorf("watchdog feed period %v at speed 1000, want a third of the 10 s watchdog, in wall time", p)
	}
}

func TestSameSeedSameCounts(t *testing.T) {
	run := func(seed int64) []uint64 {
		b := newBench(t, Config{Seed: seed}, 30, 1)
		var out []uint64
		for th := 20.0; th < 23; th += 0.25 {
			b.at(th, 2*th)
			out = append(out, uint64(b.count(time.Second)))
		}
		return out
	}
	a, b, c := run(99), run(99), run(100)
	if !slices.Equal(a, b) {
		t.Errorf("same seed, different counts: %v, %v", a, b)
	}
	if slices.Equal(a, c) {
		t.Errorf("different seeds, same counts: %v", a)
	}
}

func TestWatchdogInHostTime(t *testing.T) {
	// On a fast simulation the watchdog still counts the host's (wall) time: 20 ms of wall time at speed 1e5
	// is 2000 s simulated, far over a 200 ms watchdog, yet not a silence of the host.
	ctx := context.Background()
	in, err := New(Config{Speed: 1e5, Watchdog: 200 * time.Millisecond}, nil)
	if err != nil {
		t.Fatal(err)
	}
	if err := in.SetHighVoltage(ctx, true); err != nil {
		t.Fatal(err)
	}
	time.Sleep(20 * time.Millisecond)
	if s := in.State(); !s.HighVoltage {
		t.Fatalf("high voltage off after 20 ms of wall time: %+v", s)
	}
	time.Sleep(300 * time.Millisecond)
	if s := in.State(); s.HighVoltage || s.OffReason != "watchdog" {
		t.Errorf("after 300 ms of host silence: high voltage %v, reason %q; want off by the watchdog", s.HighVoltage, s.OffReason)
	}
}
