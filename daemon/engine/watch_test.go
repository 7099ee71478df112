package engine_test

import (
	"context"
	"fmt"
	"io"
	"log/slog"
	"sync"
	"testing"
	"time"

	"goniod/daemon/engine"
	"goniod/daemon/instrument"
	"goniod/daemon/scan"
	"goniod/daemon/store"
	"goniod/driver"
	"goniod/sim"
)

// watchRig is an engine on the simulator with a real store in a temporary directory.
type watchRig struct {
	eng *engine.Engine
	sim *sim.Instrument
	dir string // the data directory
}

func startWatchRig(t testing.TB) *watchRig { return startWatchRigAt(t, 1e6) }

// startWatchRigAt runs the simulator at the given speed (simulated seconds per wall second).
func startWatchRigAt(t testing.TB, speed float64) *watchRig {
	return startObservedRig(t, speed, nil, nil)
}

// startObservedRig is startWatchRigAt with an observer of the engine (nil: none) and the simulator seen
// through wrap (nil: as it is).
func startObservedRig(t testing.TB, speed float64, obs engine.Observer, wrap func(*sim.Instrument) driver.Instrument) *watchRig {
	t.Helper()
	log := slog.New(slog.NewTextHandler(io.Discard, nil))
	dir := t.TempDir()
	st, err := store.Open(dir, log)
	if err != nil {
		t.Fatal(err)
	}
	in, err := sim.New(sim.Config{Seed: 5, Speed: speed}, nil)
	if err != nil {
		t.Fatal(err)
	}
	cfg := instrument.FromDescription("sim", "sim", in.Describe())
	if err := cfg.Validate(); err != nil {
		t.Fatal(err)
	}
	var drv driver.Instrument = in
	if wrap != nil {
		drv = wrap(in)
	}
	ctl, err := instrument.NewController(drv, cfg, log)
	if err != nil {
		t.Fatal(err)
	}
	eng, err := engine.New(engine.Options{Store: st, Controller: ctl, Log: log, Version: "test", Observer: obs})
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithCancel(context.Background())
	var wg sync.WaitGroup
	wg.Add(2)
	go func() { defer wg.Done(); ctl.Run(ctx) }()
	go func() { defer wg.Done(); eng.Run(ctx) }()
	t.Cleanup(func() { cancel(); wg.Wait(); st.Close() })
	return &watchRig{eng: eng, sim: in, dir: dir}
}

// timedScan is N points at the present position: no moves, so points come as fast as the store takes them.
func timedScan(n int) scan.Request {
	return scan.Request{Kind: scan.Timed, Points: n, Dwell: time.Millisecond}
}

// waitState polls a scan's record until it reaches state.
func waitState(t testing.TB, eng *engine.Engine, id string, want scan.State, within time.Duration) scan.Record {
	t.Helper()
	deadline := time.Now().Add(within)
	for {
		rec, err := eng.Get(id)
		if err != nil {
			t.Fatal(err)
		}
		if rec.State == want {
			return rec
		}
		if time.Now().After(deadline) {
			t.Fatalf("scan %s is %s after %v, want %s (%s)", id, rec.State, within, want, rec.Reason)
		}
		time.Sleep(2 * time.Millisecond)
	}
}

// watchLog checks one watcher's events as they come: a record first, then points from its start index on, each
// once and in order, state records only between points, and the End event last.
type watchLog struct {
	from, next int
	records    []scan.State
	firstPoint int // records seen before the first point
	end        bool
	err        error
}

func (w *watchLog) take(ev engine.Event) error {
	switch {
	case w.end:
		w.err = fmt.Errorf("event after the end")
	case ev.Point != nil:
		if len(w.records) == 0 {
			w.err = fmt.Errorf("point %d before any record", ev.Point.Index)
		} else if int(ev.Point.Index) != w.next {
			w.err = fmt.Errorf("point %d where %d was due", ev.Point.Index, w.next)
		}
		if w.next == w.from {
			w.firstPoint = len(w.records)
		}
		w.next++
	case ev.Record != nil:
		w.records = append(w.records, ev.Record.State)
		w.end = ev.End
		if ev.Record.State == scan.Done && ev.Record.PointsDone != w.next && w.next >= w.from {
			w.err = fmt.Errorf("done record with %d points after point %d", ev.Record.PointsDone, w.next-1)
		}
	default:
		w.err = fmt.Errorf("empty event")
	}
	return w.err
}

// TestWatchersDoNotHoldAcquisition runs a scan with 1,000 watchers: most follow live, some started mid-scan
// replay from the start or from a later index, some are slow, and some are stalled until the scan has ended
// (they then read the store). The scan finishing proves the publisher never waits for a watcher; each watcher
// must get every point from its start index, in order, exactly once, with the end event last. (Falling behind
// the in-memory ring while the scan runs is TestWatchBehindTheRing; the cost of watchers to the scan's rate is
// BenchmarkAcquisitionWithWatchers.)
func TestWatchersDoNotHoldAcquisition(t *testing.T) {
	const points, watchers, stalled, slow = 2000, 1000, 20, 30
	r := startWatchRig(t)
	rec, err := r.eng.Submit(timedScan(points))
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithTimeout(context.Background(), 2*time.Minute)
	defer cancel()
	ended := make(chan struct{})
	logs := make([]*watchLog, watchers)
	var wg sync.WaitGroup
	start := func(i, from int, pace func(n int)) {
		logs[i] = &watchLog{from: from, next: from}
		wg.Add(1)
		go func() {
			defer wg.Done()
			n := 0
			err := r.eng.Watch(ctx, rec.ID, from, func(ev engine.Event) error {
				pace(n)
				n++
				return logs[i].take(ev)
			})
			if err != nil && logs[i].err == nil {
				logs[i].err = err
			}
		}()
	}
	live := func(int) {}
	for i := range stalled {
		start(i, 0, func(n int) {
			if n == 1 {
				<-ended // hold the first point until the scan is over
			}
		})
	}
	for i := stalled; i < stalled+slow; i++ {
		start(i, 0, func(n int) {
			if n%100 == 0 {
				time.Sleep(time.Millisecond)
			}
		})
	}
	half := watchers / 2
	for i := stalled + slow; i < half; i++ {
		start(i, 0, live)
	}
	mid := waitPoints(t, r.eng, rec.ID, points/3)
	for i := half; i < watchers; i++ {
		from := 0
		if i%2 == 1 {
			from = (i * 7) % points // replay from a given index
		}
		start(i, from, live)
	}
	final := waitState(t, r.eng, rec.ID, scan.Done, time.Minute)
	took := final.Ended.Sub(final.Started)
	close(ended)
	wg.Wait()
	for i, l := range logs {
		switch {
		case l.err != nil:
			t.Fatalf("watcher %d (from %d): %v", i, l.from, l.err)
		case l.next != points || !l.end:
			t.Fatalf("watcher %d (from %d) got points up to %d of %d, end %v", i, l.from, l.next, points, l.end)
		case l.records[len(l.records)-1] != scan.Done:
			t.Fatalf("watcher %d: last record %s", i, l.records[len(l.records)-1])
		case i < half && (l.records[0] != scan.Queued && l.records[0] != scan.Running):
			t.Fatalf("watcher %d started before the scan but first saw %v", i, l.records)
		case i < half && l.records[0] == scan.Queued && (l.firstPoint != 2 || l.records[1] != scan.Running):
			t.Fatalf("watcher %d: records %v, %d before the first point; want running before point 0", i, l.records, l.firstPoint)
		}
	}
	t.Logf("%d points in %v (%.0f points/s) with %d watchers (%d stalled until the end, %d slow, %d joined after point %d)",
		points, took.Round(time.Millisecond), float64(points)/took.Seconds(), watchers, stalled, slow, watchers-half, mid)
}

// waitPoints waits until a scan has at least n durable points and returns how many it has.
func waitPoints(t testing.TB, eng *engine.Engine, id string, n int) int {
	t.Helper()
	deadline := time.Now().Add(time.Minute)
	for {
		rec, err := eng.Get(id)
		if err != nil {
			t.Fatal(err)
		}
		if rec.PointsDone >= n || rec.State.Terminal() {
			return rec.PointsDone
		}
		if time.Now().After(deadline) {
			t.Fatalf("scan %s has %d points after a minute, want %d", id, rec.PointsDone, n)
		}
		time.Sleep(time.Millisecond)
	}
}
