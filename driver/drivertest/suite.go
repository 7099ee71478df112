// Package drivertest holds what every driver is tested with: the conformance suite that the simulator and the
// serial driver both pass (Run), and a transcript player and recorder for tests of line protocols.
package drivertest

import (
	"context"
	"errors"
	"math"
	"testing"
	"time"

	"goniod/driver"
)

// Setup tells the suite how to get an instrument.
type Setup struct {
	// Open returns a fresh instrument for one test, as after power-up: high voltage off, enclosure closed.
	// The suite closes it at the end of the test.
	Open func(t *testing.T) driver.Instrument
	// LongGate is a gate that lasts at least 2 s of wall time on this instrument, for the tests that cut a
	// count short.
	LongGate time.Duration
}

// Run runs the conformance suite. The instrument must offer Mover, Counter and Source (what scans need);
// the optional capabilities it offers are tested too.
func Run(t *testing.T, s Setup) {
	tests := []struct {
		name string
		fn   func(t *testing.T, in *inst)
	}{
		{"Identify", testIdentify},
		{"SafeAtStart", testSafeAtStart},
		{"Describe", testDescribe},
		{"MoveAndPosition", testMoveAndPosition},
		{"MoveAll", testMoveAll},
		{"MoveOutOfRange", testMoveOutOfRange},
		{"UnknownAxis", testUnknownAxis},
		{"Count", testCount},
		{"CountNegativeGate", testCountNegative},
		{"Source", testSource},
		{"SourceOverRating", testSourceOverRating},
		{"HighVoltage", testHighVoltage},
		{"HaltIdle", testHaltIdle},
		{"HaltDuringCount", testHaltDuringCount},
		{"CancelDuringCount", testCancelDuringCount},
		{"Watchdog", testWatchdog},
		{"Link", testLink},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			d := s.Open(t)
			t.Cleanup(func() {
				if err := d.Close(); err != nil {
					t.Errorf("Close: %v", err)
				}
			})
			tc.fn(t, newInst(t, d, s.LongGate))
		})
	}
}

// inst is the instrument under test with its capabilities.
type inst struct {
	driver.Instrument
	driver.Mover
	driver.Counter
	driver.Source
	desc     driver.Description
	longGate time.Duration
}

func newInst(t *testing.T, d driver.Instrument, longGate time.Duration) *inst {
	t.Helper()
	in := &inst{Instrument: d, longGate: longGate}
	var ok bool
	if in.Mover, ok = d.(driver.Mover); !ok {
		t.Fatal("instrument is no driver.Mover")
	}
	if in.Counter, ok = d.(driver.Counter); !ok {
		t.Fatal("instrument is no driver.Counter")
	}
	if in.Source, ok = d.(driver.Source); !ok {
		t.Fatal("instrument is no driver.Source")
	}
	if ds, ok := d.(driver.Describer); ok {
		in.desc = ds.Describe()
	}
	return in
}

func ctxT(t *testing.T) context.Context {
	ctx, cancel := context.WithTimeout(context.Background(), 20*time.Second)
	t.Cleanup(cancel)
	return ctx
}

// axes are the described axes, or the simulator's default pair when the instrument does not describe itself.
func (in *inst) axes() []driver.AxisDescription {
	if len(in.desc.Axes) > 0 {
		return in.desc.Axes
	}
	return []driver.AxisDescription{{Name: "theta", MinDeg: -10, MaxDeg: 100, ResolutionDeg: 0.001},
		{Name: "twotheta", MinDeg: -10, MaxDeg: 170, ResolutionDeg: 0.001}}
}

// within is a point fraction f of the way through an axis's range, on the axis's step grid.
func within(a driver.AxisDescription, f float64) float64 {
	v := a.MinDeg + f*(a.MaxDeg-a.MinDeg)
	if a.ResolutionDeg > 0 {
		v = math.Round(v/a.ResolutionDeg) * a.ResolutionDeg
	}
	return v
}

func near(a driver.AxisDescription, got, want float64) bool {
	return math.Abs(got-want) <= max(a.ResolutionDeg, 1e-9)*1.0001
}

func testIdentify(t *testing.T, in *inst) {
	id, err := in.Identify(ctxT(t))
	if err != nil || id == "" {
		t.Fatalf("Identify = %q, %v; want a non-empty identity", id, err)
	}
}

func testSafeAtStart(t *testing.T, in *inst) {
	ctx := ctxT(t)
	s, err := in.SourceState(ctx)
	if err != nil {
		t.Fatal(err)
	}
	if s.HighVoltage {
		t.Error("high voltage is on right after opening; nothing may switch it on by itself")
	}
	if il, ok := in.Instrument.(driver.Interlock); ok {
		closed, err := il.InterlockClosed(ctx)
		if err != nil || !closed {
			t.Errorf("InterlockClosed = %v, %v; want true, nil at start", closed, err)
		}
	}
}

func testDescribe(t *testing.T, in *inst) {
	if _, ok := in.Instrument.(driver.Describer); !ok {
		t.Skip("instrument does not describe itself")
	}
	d := in.desc
	if len(d.Axes) == 0 || len(d.Channels) == 0 {
		t.Fatalf("Describe: %d axes, %d channels; want at least one of each", len(d.Axes), len(d.Channels))
	}
	for _, a := range d.Axes {
		if a.Name == "" || !(a.MinDeg < a.MaxDeg) || !(a.ResolutionDeg > 0) {
			t.Errorf("axis %+v: want a name, min < max and a positive resolution", a)
		}
	}
	if d.MaxKV <= 0 || d.MaxMA <= 0 || d.MaxPowerW <= 0 {
		t.Errorf("tube rating %g kV, %g mA, %g W: want positive values", d.MaxKV, d.MaxMA, d.MaxPowerW)
	}
}

func testMoveAndPosition(t *testing.T, in *inst) {
	ctx := ctxT(t)
	for _, a := range in.axes() {
		for _, f := range []float64{0.25, 0.5} {
			want := within(a, f)
			got, err := in.Move(ctx, a.Name, want)
			if err != nil {
				t.Fatalf("Move(%s, %g): %v", a.Name, want, err)
			}
			if !near(a, got, want) {
				t.Errorf("Move(%s, %g) read back %g", a.Name, want, got)
			}
			pos, err := in.Position(ctx, a.Name)
			if err != nil || !near(a, pos, want) {
				t.Errorf("Position(%s) = %g, %v; want %g", a.Name, pos, err, want)
			}
		}
	}
}

func testMoveAll(t *testing.T, in *inst) {
	mm, ok := in.Instrument.(driver.MultiMover)
	if !ok {
		t.Skip("instrument cannot move axes together")
	}
	target := map[string]float64{}
	for _, a := range in.axes() {
		target[a.Name] = within(a, 0.3)
	}
	got, err := mm.MoveAll(ctxT(t), target)
	if err != nil {
		t.Fatalf("MoveAll(%v): %v", target, err)
	}
	for _, a := range in.axes() {
		if !near(a, got[a.Name], target[a.Name]) {
			t.Errorf("MoveAll: %s read back %g, want %g", a.Name, got[a.Name], target[a.Name])
		}
	}
}

func testMoveOutOfRange(t *testing.T, in *inst) {
	ctx := ctxT(t)
	a := in.axes()[0]
	before, err := in.Position(ctx, a.Name)
	if err != nil {
		t.Fatal(err)
	}
	if _, err := in.Move(ctx, a.Name, a.MaxDeg+10); !errors.Is(err, driver.ErrOutOfRange) {
		t.Errorf("Move(%s, %g) beyond the limit: err = %v, want driver.ErrOutOfRange", a.Name, a.MaxDeg+10, err)
	}
	if after, err := in.Position(ctx, a.Name); err != nil || after != before {
		t.Errorf("refused move changed %s from %g to %g (%v)", a.Name, before, after, err)
	}
}

func testUnknownAxis(t *testing.T, in *inst) {
	ctx := ctxT(t)
	if _, err := in.Move(ctx, "no-such-axis", 1); !errors.Is(err, driver.ErrUnknownAxis) {
		t.Errorf("Move(no-such-axis): err = %v, want driver.ErrUnknownAxis", err)
	}
	if _, err := in.Position(ctx, "no-such-axis"); !errors.Is(err, driver.ErrUnknownAxis) {
		t.Errorf("Position(no-such-axis): err = %v, want driver.ErrUnknownAxis", err)
	}
}

func testCount(t *testing.T, in *inst) {
	ctx := ctxT(t)
	for _, gate := range []time.Duration{0, 10 * time.Millisecond} {
		c, err := in.Count(ctx, gate)
		if err != nil {
			t.Fatalf("Count(%v): %v", gate, err)
		}
		if len(c.Channels) == 0 || (len(in.desc.Channels) > 0 && len(c.Channels) != len(in.desc.Channels)) {
			t.Errorf("Count(%v): %d channels, described %d", gate, len(c.Channels), len(in.desc.Channels))
		}
		if c.Gate != gate {
			t.Errorf("Count(%v): gate %v", gate, c.Gate)
		}
	}
}

func testCountNegative(t *testing.T, in *inst) {
	if _, err := in.Count(ctxT(t), -time.Second); !errors.Is(err, driver.ErrOutOfRange) {
		t.Errorf("Count(-1s): err = %v, want driver.ErrOutOfRange", err)
	}
}

// rating is the described tube rating, or a small safe one.
func (in *inst) rating() (kv, ma float64) {
	if in.desc.MaxKV > 0 && in.desc.MaxMA > 0 {
		return in.desc.MaxKV, in.desc.MaxMA
	}
	return 20, 0.5
}

func testSource(t *testing.T, in *inst) {
	ctx := ctxT(t)
	maxKV, maxMA := in.rating()
	kv, ma := math.Round(maxKV*0.6), math.Round(maxMA*400)/1000
	if err := in.SetSource(ctx, kv, ma); err != nil {
		t.Fatalf("SetSource(%g kV, %g mA): %v", kv, ma, err)
	}
	s, err := in.SourceState(ctx)
	if err != nil || math.Abs(s.KV-kv) > 1e-3 || math.Abs(s.MA-ma) > 1e-3 || s.HighVoltage {
		t.Errorf("SourceState = %+v, %v; want %g kV, %g mA, high voltage off", s, err, kv, ma)
	}
}

func testSourceOverRating(t *testing.T, in *inst) {
	ctx := ctxT(t)
	maxKV, maxMA := in.rating()
	before, err := in.SourceState(ctx)
	if err != nil {
		t.Fatal(err)
	}
	if err := in.SetSource(ctx, maxKV*2, maxMA/2); !errors.Is(err, driver.ErrOutOfRange) {
		t.Errorf("SetSource(%g kV) over the rating: err = %v, want driver.ErrOutOfRange", maxKV*2, err)
	}
	if after, err := in.SourceState(ctx); err != nil || after != before {
		t.Errorf("refused setting changed the source from %+v to %+v (%v)", before, after, err)
	}
}

func testHighVoltage(t *testing.T, in *inst) {
	ctx := ctxT(t)
	for _, on := range []bool{true, false} {
		if err := in.SetHighVoltage(ctx, on); err != nil {
			t.Fatalf("SetHighVoltage(%v): %v", on, err)
		}
		s, err := in.SourceState(ctx)
		if err != nil || s.HighVoltage != on {
			t.Errorf("after SetHighVoltage(%v): SourceState = %+v, %v", on, s, err)
		}
		if sr, ok := in.Instrument.(driver.StatusReader); ok {
			st, err := sr.Status(ctx)
			if err != nil || st.HighVoltage != on || !st.InterlockClosed {
				t.Errorf("after SetHighVoltage(%v): Status = %+v, %v", on, st, err)
			}
		}
	}
}

func testHaltIdle(t *testing.T, in *inst) {
	ctx := ctxT(t)
	if err := in.SetHighVoltage(ctx, true); err != nil {
		t.Fatal(err)
	}
	if err := in.Halt(); err != nil {
		t.Fatalf("Halt: %v", err)
	}
	if s, err := in.SourceState(ctx); err != nil || s.HighVoltage {
		t.Errorf("after Halt: SourceState = %+v, %v; want high voltage off", s, err)
	}
}

// countInBackground starts a long count and returns a channel with its error.
func (in *inst) countInBackground(ctx context.Context) <-chan error {
	done := make(chan error, 1)
	go func() {
		_, err := in.Count(ctx, in.longGate)
		done <- err
	}()
	return done
}

// cutShort waits for a count that should end early.
func cutShort(t *testing.T, done <-chan error, what string) {
	t.Helper()
	select {
	case err := <-done:
		if err == nil {
			t.Errorf("a count %s returned no error", what)
		}
	case <-time.After(1500 * time.Millisecond):
		t.Fatalf("a count %s did not end within 1.5 s", what)
	}
}

func testHaltDuringCount(t *testing.T, in *inst) {
	ctx := ctxT(t)
	if err := in.SetHighVoltage(ctx, true); err != nil {
		t.Fatal(err)
	}
	done := in.countInBackground(ctx)
	time.Sleep(150 * time.Millisecond)
	start := time.Now()
	if err := in.Halt(); err != nil {
		t.Fatalf("Halt during a count: %v", err)
	}
	if d := time.Since(start); d > time.Second {
		t.Errorf("Halt took %v; it must not block for long", d)
	}
	cutShort(t, done, "halted")
	if s, err := in.SourceState(ctx); err != nil || s.HighVoltage {
		t.Errorf("after Halt: SourceState = %+v, %v; want high voltage off", s, err)
	}
}

func testCancelDuringCount(t *testing.T, in *inst) {
	ctx := ctxT(t)
	if err := in.SetHighVoltage(ctx, true); err != nil {
		t.Fatal(err)
	}
	cctx, cancel := context.WithCancel(ctx)
	done := in.countInBackground(cctx)
	time.Sleep(150 * time.Millisecond)
	cancel()
	cutShort(t, done, "whose context was cancelled")
	a := in.axes()[0]
	if _, err := in.Position(ctx, a.Name); err != nil {
		t.Errorf("Position after a cancelled count: %v", err)
	}
	if s, err := in.SourceState(ctx); err != nil || !s.HighVoltage {
		t.Errorf("after a cancelled count: SourceState = %+v, %v; cancelling must leave the source as it was", s, err)
	}
}

func testWatchdog(t *testing.T, in *inst) {
	w, ok := in.Instrument.(driver.Watchdog)
	if !ok {
		t.Skip("instrument has no host watchdog")
	}
	if err := w.Feed(ctxT(t)); err != nil {
		t.Errorf("Feed: %v", err)
	}
	if p := w.WatchdogPeriod(); p <= 0 {
		t.Errorf("WatchdogPeriod = %v, want > 0", p)
	}
}

func testLink(t *testing.T, in *inst) {
	lr, ok := in.Instrument.(driver.LinkReporter)
	if !ok {
		t.Skip("instrument has no link to report")
	}
	if s := lr.LinkStatus(); s.State != driver.LinkUp {
		t.Errorf("LinkStatus = %+v right after opening, want up", s)
	}
}
