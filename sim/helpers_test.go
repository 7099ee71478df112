package sim

import (
	"context"
	"math"
	"testing"
	"time"

	"goniod/xray"
)

// epoch is the simulated start time of every test instrument.
var epoch = time.Date(2024, 5, 1, 9, 0, 0, 0, time.UTC)

// bench is a test instrument on a manual clock.
type bench struct {
	t     *testing.T
	in    *Instrument
	clock *ManualClock
}

// newBench builds an instrument on a manual clock, sets the tube to kV/mA, switches high voltage on and lets
// the ramp finish.
func newBench(t *testing.T, cfg Config, kV, mA float64) *bench {
	t.Helper()
	clock := NewManualClock(epoch)
	in, err := New(cfg, clock)
	if err != nil {
		t.Fatalf("New(%+v): %v", cfg, err)
	}
	b := &bench{t: t, in: in, clock: clock}
	ctx := context.Background()
	if err := in.SetSource(ctx, kV, mA); err != nil {
		t.Fatal(err)
	}
	if err := in.SetHighVoltage(ctx, true); err != nil {
		t.Fatal(err)
	}
	if err := in.Wait(ctx, 2*time.Second); err != nil {
		t.Fatal(err)
	}
	return b
}

// at moves both axes to motor angles.
func (b *bench) at(theta, twoTheta float64) {
	b.t.Helper()
	if _, err := b.in.MoveAll(context.Background(), map[string]float64{AxisTheta: theta, AxisTwoTheta: twoTheta}); err != nil {
		b.t.Fatal(err)
	}
}

// count gates the counter for gate and returns the counts.
func (b *bench) count(gate time.Duration) float64 {
	b.t.Helper()
	c, err := b.in.Count(context.Background(), gate)
	if err != nil {
		b.t.Fatal(err)
	}
	if c.Gate != gate || len(c.Channels) != 1 {
		b.t.Fatalf("Count(%v) = %+v", gate, c)
	}
	return float64(c.Channels[0])
}

// rateAt moves to motor angles and returns the observed rate over gate.
func (b *bench) rateAt(theta, twoTheta float64, gate time.Duration) float64 {
	b.t.Helper()
	b.at(theta, twoTheta)
	return b.count(gate) / gate.Seconds()
}

// corrected is an observed rate corrected for the instrument's dead time (Knoll, 4th ed., ch. 4).
func (b *bench) corrected(observed float64) float64 {
	b.t.Helper()
	model := xray.NonParalyzable
	if b.in.cfg.Paralyzable {
		model = xray.Paralyzable
	}
	r, err := xray.TrueRate(xray.Rate{CPS: observed}, b.in.cfg.DeadTime.Seconds(), model)
	if err != nil {
		b.t.Fatal(err)
	}
	return r.CPS
}

// braggDeg is the Bragg angle of an anode line on a crystal in order n.
func braggDeg(t *testing.T, anode, line, crystal string, n int) float64 {
	t.Helper()
	a, err := xray.LookupAnode(anode)
	if err != nil {
		t.Fatal(err)
	}
	l, ok := a.Line(line)
	if !ok {
		t.Fatalf("%s has no %s", anode, line)
	}
	c, err := xray.LookupCrystal(crystal)
	if err != nil {
		t.Fatal(err)
	}
	th, ok := xray.BraggAngleDeg(l.WavelengthNM(), c.DNM, n)
	if !ok {
		t.Fatalf("%s %s does not reflect in order %d on %s", anode, line, n, crystal)
	}
	return th
}

// halfCrossings are the half-maximum crossings of y(x) above base on either side of the highest point, by
// linear interpolation.
func halfCrossings(x, y []float64, base float64) (left, right float64) {
	top := 0
	for i := range y {
		if y[i] > y[top] {
			top = i
		}
	}
	half := base + (y[top]-base)/2
	l := top
	for l > 0 && y[l] > half {
		l--
	}
	r := top
	for r < len(y)-1 && y[r] > half {
		r++
	}
	left = x[l] + (half-y[l])/(y[l+1]-y[l])*(x[l+1]-x[l])
	right = x[r-1] + (half-y[r-1])/(y[r]-y[r-1])*(x[r]-x[r-1])
	return left, right
}

// fwhm is the full width at half maximum of y(x) above base.
func fwhm(x, y []float64, base float64) float64 {
	l, r := halfCrossings(x, y, base)
	return r - l
}

// centre is the midpoint of the half-maximum crossings of y(x) above base.
func centre(x, y []float64, base float64) float64 {
	l, r := halfCrossings(x, y, base)
	return (l + r) / 2
}

// meanVar is the sample mean and (n−1) variance.
func meanVar(xs []float64) (mean, variance float64) {
	for _, x := range xs {
		mean += x
	}
	mean /= float64(len(xs))
	for _, x := range xs {
		variance += (x - mean) * (x - mean)
	}
	return mean, variance / float64(len(xs)-1)
}

// within reports whether got is within tol of want.
func within(got, want, tol float64) bool { return math.Abs(got-want) <= tol }
