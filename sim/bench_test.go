package sim

import (
	"context"
	"testing"
	"time"
)

// BenchmarkRate is one evaluation of the intensity model at a continuum point with lines nearby.
func BenchmarkRate(b *testing.B) {
	in, err := New(Config{}, NewManualClock(epoch))
	if err != nil {
		b.Fatal(err)
	}
	for b.Loop() {
		in.model.rate(22.4, 44.8, 30, 1)
	}
}

// benchCount times one Count of gate at the first-order Cu Kα peak (about 2,500 counts/s true).
func benchCount(b *testing.B, gate time.Duration) {
	clock := NewManualClock(epoch)
	in, err := New(Config{Watchdog: -1}, clock)
	if err != nil {
		b.Fatal(err)
	}
	ctx := context.Background()
	if err := in.SetSource(ctx, 30, 1); err != nil {
		b.Fatal(err)
	}
	if err := in.SetHighVoltage(ctx, true); err != nil {
		b.Fatal(err)
	}
	if _, err := in.MoveAll(ctx, map[string]float64{AxisTheta: 22.51, AxisTwoTheta: 45.02}); err != nil {
		b.Fatal(err)
	}
	clock.Advance(2 * time.Second)
	for b.Loop() {
		if _, err := in.Count(ctx, gate); err != nil {
			b.Fatal(err)
		}
	}
}

// 1 s and 50 s gates simulate every recorded event; a 1 h gate (the daemon's longest dwell) takes the normal limit.
func BenchmarkCount1s(b *testing.B)  { benchCount(b, time.Second) }
func BenchmarkCount50s(b *testing.B) { benchCount(b, 50*time.Second) }
func BenchmarkCount1h(b *testing.B)  { benchCount(b, time.Hour) }
