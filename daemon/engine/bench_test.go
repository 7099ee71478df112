package engine_test

import (
	"context"
	"fmt"
	"slices"
	"sync"
	"sync/atomic"
	"testing"
	"time"

	"goniod/daemon/engine"
	"goniod/daemon/scan"
	"goniod/driver"
	goniodv1 "goniod/proto/goniod/v1"
	"goniod/sim"
)

// acquisitionProbe observes one benchmark scan: the runner's time outside the instrument for each point, and
// the moment each point became durable.
type acquisitionProbe struct {
	base      time.Time
	overhead  []time.Duration // by point index; written by the committer, read after the scan has ended
	durableAt []atomic.Int64  // nanoseconds after base, by point index
}

func newAcquisitionProbe(points int) *acquisitionProbe {
	return &acquisitionProbe{base: time.Now(), overhead: make([]time.Duration, points), durableAt: make([]atomic.Int64, points)}
}

func (p *acquisitionProbe) PointStored(_ *scan.Record, pt *goniodv1.Point, overhead time.Duration) {
	p.overhead[pt.Index] = overhead
}

func (p *acquisitionProbe) StateChanged(*scan.Record) {}

func (p *acquisitionProbe) PointsDurable(_ string, points []*goniodv1.Point, at time.Time) {
	ns := at.Sub(p.base).Nanoseconds()
	for _, pt := range points {
		p.durableAt[pt.Index].Store(ns)
	}
}

var _ engine.DurableObserver = (*acquisitionProbe)(nil)

// driverClock times the calls into the instrument driver. A point starts with its Count call (a timed scan
// moves nothing); the time from one point's start to the next, less the time inside the driver, is the
// daemon's wall time for the point outside the driver: controller round trips, building, queueing for the
// committer.
type driverClock struct {
	base   time.Time
	mu     sync.Mutex
	starts []time.Duration // when point k's Count began, after base
	inside []time.Duration // time inside the driver from point k's Count to point k+1's
}

// call starts timing one driver call; the returned function ends it.
func (c *driverClock) call(count bool) func() {
	t0 := time.Now()
	return func() {
		d := time.Since(t0)
		c.mu.Lock()
		defer c.mu.Unlock()
		if count {
			c.starts, c.inside = append(c.starts, t0.Sub(c.base)), append(c.inside, 0)
		}
		if n := len(c.inside); n > 0 {
			c.inside[n-1] += d
		}
	}
}

// outside returns each point's wall time outside the driver (all points but the last).
func (c *driverClock) outside() []time.Duration {
	c.mu.Lock()
	defer c.mu.Unlock()
	var out []time.Duration
	for k := 0; k+1 < len(c.starts); k++ {
		out = append(out, c.starts[k+1]-c.starts[k]-c.inside[k])
	}
	return out
}

// timedSim is the simulator with its per-point calls timed; every other capability is the simulator's own.
type timedSim struct {
	*sim.Instrument
	clock *driverClock
}

func (s timedSim) Count(ctx context.Context, gate time.Duration) (driver.Counts, error) {
	defer s.clock.call(true)()
	return s.Instrument.Count(ctx, gate)
}

func (s timedSim) Status(ctx context.Context) (driver.Status, error) {
	defer s.clock.call(false)()
	return s.Instrument.Status(ctx)
}

func (s timedSim) Move(ctx context.Context, axis string, deg float64) (float64, error) {
	defer s.clock.call(false)()
	return s.Instrument.Move(ctx, axis, deg)
}

func (s timedSim) MoveAll(ctx context.Context, target map[string]float64) (map[string]float64, error) {
	defer s.clock.call(false)()
	return s.Instrument.MoveAll(ctx, target)
}

func (s timedSim) Feed(ctx context.Context) error {
	defer s.clock.call(false)()
	return s.Instrument.Feed(ctx)
}

// fanOutSample is how many arrivals all watchers together record at most: each watcher notes the points whose
// index falls on its own residue of a stride, so the sample covers every point and every watcher evenly.
const fanOutSample = 2_000_000

// BenchmarkAcquisitionWithWatchers measures a timed scan (one fsync per group of waiting points) with 1, 100
// and 1,000 live watchers: at zero dwell (the simulator runs a million times faster than real time, so the
// store and the daemon set the pace) and at a 20 ms dwell in real time.
//
// Metrics: points/s, durable points per second; overhead-µs-p50/p99, the daemon's wall time per point outside
// the driver (see driverClock); runner-µs-p50, the narrower part the runner accounts to itself (what
// goniod_point_overhead_seconds records); fanout-ms-p50/p99, the time from a point being durable (its batch
// fsynced) to its arrival at a watcher, over every watcher.
func BenchmarkAcquisitionWithWatchers(b *testing.B) {
	for _, dwell := range []struct {
		name  string
		speed float64
		d     time.Duration
	}{{"zero", 1e6, time.Millisecond}, {"20ms", 1, 20 * time.Millisecond}} {
		for _, watchers := range []int{1, 100, 1000} {
			b.Run(fmt.Sprintf("dwell=%s/watchers=%d", dwell.name, watchers), func(b *testing.B) {
				benchAcquisition(b, dwell.speed, dwell.d, watchers)
			})
		}
	}
}

func benchAcquisition(b *testing.B, speed float64, dwell time.Duration, watchers int) {
	points := max(b.N, 100)
	probe := newAcquisitionProbe(points)
	clock := &driverClock{base: time.Now(), starts: make([]time.Duration, 0, points), inside: make([]time.Duration, 0, points)}
	r := startObservedRig(b, speed, probe, func(in *sim.Instrument) driver.Instrument { return timedSim{in, clock} })
	// High voltage on (the demo scenario's 30 kV, 0.8 mA), so that every point checks the source as a real
	// scan does.
	rec, err := r.eng.Submit(scan.Request{Kind: scan.Timed, Points: points, Dwell: dwell, Source: &scan.Source{KV: 30, MA: 0.8}})
	if err != nil {
		b.Fatal(err)
	}
	stride := max(1, watchers*points/fanOutSample)
	arrivals := make([][]time.Duration, watchers)
	errs := make(chan error, watchers)
	var wg sync.WaitGroup
	for w := range watchers {
		arrivals[w] = make([]time.Duration, 0, points/stride+1)
		wg.Add(1)
		go func() {
			defer wg.Done()
			errs <- r.eng.Watch(context.Background(), rec.ID, 0, func(ev engine.Event) error {
				if ev.Point == nil || int(ev.Point.Index)%stride != w%stride {
					return nil
				}
				now := time.Since(probe.base).Nanoseconds()
				arrivals[w] = append(arrivals[w], time.Duration(now-probe.durableAt[ev.Point.Index].Load()))
				return nil
			})
		}()
	}
	b.ResetTimer()
	final := waitState(b, r.eng, rec.ID, scan.Done, 10*time.Minute)
	b.StopTimer()
	wg.Wait()
	close(errs)
	for err := range errs {
		if err != nil {
			b.Fatal(err)
		}
	}
	took := final.Ended.Sub(final.Started)
	var fanOut []time.Duration
	for _, a := range arrivals {
		fanOut = append(fanOut, a...)
	}
	b.ReportMetric(float64(points)/took.Seconds(), "points/s")
	outside := clock.outside()
	b.ReportMetric(quantile(outside, 0.5).Seconds()*1e6, "overhead-µs-p50")
	b.ReportMetric(quantile(outside, 0.99).Seconds()*1e6, "overhead-µs-p99")
	b.ReportMetric(quantile(probe.overhead, 0.5).Seconds()*1e6, "runner-µs-p50")
	b.ReportMetric(quantile(fanOut, 0.5).Seconds()*1e3, "fanout-ms-p50")
	b.ReportMetric(quantile(fanOut, 0.99).Seconds()*1e3, "fanout-ms-p99")
	b.ReportMetric(0, "ns/op")
}

// quantile returns the q-quantile of ds (nearest rank), sorting ds; 0 when ds is empty.
func quantile(ds []time.Duration, q float64) time.Duration {
	if len(ds) == 0 {
		return 0
	}
	slices.Sort(ds)
	return ds[min(len(ds)-1, int(q*float64(len(ds))))]
}
