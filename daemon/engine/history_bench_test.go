package engine_test

import (
	"context"
	"io"
	"log/slog"
	"runtime"
	"sync"
	"testing"
	"time"

	"goniod/daemon/engine"
	"goniod/daemon/instrument"
	"goniod/daemon/scan"
	"goniod/daemon/store"
	"goniod/sim"
)

// BenchmarkHeapPerEndedScan measures what the engine keeps in memory for each scan that has ended: the heap
// after b.N one-point scans have run to the end (live-B/scan) and after an engine is opened afresh on the same
// store (loaded-B/scan), less the heap before, per scan. A daemon that runs for years must not grow by much
// with its history.
func BenchmarkHeapPerEndedScan(b *testing.B) {
	n := max(b.N, 200)
	dir := b.TempDir()
	st, eng, ctl := openHistory(b, dir)
	before := heapInUse()
	b.ResetTimer()
	stop := runScans(b, eng, ctl, n, 1)
	b.StopTimer()
	live := heapInUse()
	runtime.KeepAlive(eng)
	stop()
	st.Close()

	st, eng, _ = openHistory(b, dir)
	defer st.Close()
	loaded := heapInUse()
	runtime.KeepAlive(eng)
	b.ReportMetric(float64(live-before)/float64(n), "live-B/scan")
	b.ReportMetric(float64(loaded-before)/float64(n), "loaded-B/scan")
	b.ReportMetric(0, "ns/op")
}

// BenchmarkStartWithHistory measures how long an engine takes to open a data directory holding 2,000 ended
// scans of 100 points each (a lab's months of work; ms/start), against reading every record file alone
// (records-ms). A restart after a crash or an update must not keep the instrument waiting. poll-ns is the
// engine's part of a state poll and a metrics scrape (queue length, scans by state) with that history.
func BenchmarkStartWithHistory(b *testing.B) {
	const scans = 2000
	dir := b.TempDir()
	st, eng, ctl := openHistory(b, dir)
	runScans(b, eng, ctl, scans, 100)()
	st.Close()
	b.ResetTimer()
	t0 := time.Now()
	for range b.N {
		st, _, _ := openHistory(b, dir)
		st.Close()
	}
	perStart := time.Since(t0) / time.Duration(b.N)
	b.StopTimer()
	// What a state poll or a scrape asks of the engine, with that history.
	st, eng, _ = openHistory(b, dir)
	const polls = 1000
	t0 = time.Now()
	for range polls {
		if eng.QueueLength() != 0 || eng.CountByState()[scan.Done] != scans {
			b.Fatal("the history does not count as 2,000 done scans")
		}
	}
	poll := time.Since(t0) / polls
	st.Close()
	t0 = time.Now()
	st, err := store.Open(dir, slog.New(slog.NewTextHandler(io.Discard, nil)))
	if err != nil {
		b.Fatal(err)
	}
	if recs, err := st.LoadRecords(); err != nil || len(recs) != scans {
		b.Fatalf("%d records (%v)", len(recs), err)
	}
	records := time.Since(t0)
	st.Close()
	b.ReportMetric(perStart.Seconds()*1e3, "ms/start")
	b.ReportMetric(records.Seconds()*1e3, "records-ms")
	b.ReportMetric(perStart.Seconds()/records.Seconds(), "x-records")
	b.ReportMetric(float64(poll.Nanoseconds()), "poll-ns")
	b.ReportMetric(0, "ns/op")
}

// runScans runs the engine and its controller, and n timed scans of the given points on them to the end; the
// returned function stops both.
func runScans(t testing.TB, eng *engine.Engine, ctl *instrument.Controller, n, points int) (stop func()) {
	t.Helper()
	ctx, cancel := context.WithCancel(context.Background())
	var wg sync.WaitGroup
	wg.Add(2)
	go func() { defer wg.Done(); ctl.Run(ctx) }()
	go func() { defer wg.Done(); eng.Run(ctx) }()
	var last scan.Record
	for range n {
		rec, err := eng.Submit(scan.Request{Kind: scan.Timed, Points: points, Dwell: time.Millisecond})
		if err != nil {
			t.Fatal(err)
		}
		last = rec
	}
	waitState(t, eng, last.ID, scan.Done, 10*time.Minute)
	return func() { cancel(); wg.Wait() }
}

// openHistory opens the data directory dir with an engine on the simulator (not running).
func openHistory(b testing.TB, dir string) (*store.Store, *engine.Engine, *instrument.Controller) {
	b.Helper()
	log := slog.New(slog.NewTextHandler(io.Discard, nil))
	st, err := store.Open(dir, log)
	if err != nil {
		b.Fatal(err)
	}
	in, err := sim.New(sim.Config{Seed: 5, Speed: 1e6}, nil)
	if err != nil {
		b.Fatal(err)
	}
	ctl, err := instrument.NewController(in, instrument.FromDescription("sim", "sim", in.Describe()), log)
	if err != nil {
		b.Fatal(err)
	}
	eng, err := engine.New(engine.Options{Store: st, Controller: ctl, Log: log, Version: "bench"})
	if err != nil {
		b.Fatal(err)
	}
	return st, eng, ctl
}

// heapInUse returns the bytes of live heap objects after a full collection.
func heapInUse() int64 {
	runtime.GC()
	runtime.GC()
	var m runtime.MemStats
	runtime.ReadMemStats(&m)
	return int64(m.HeapAlloc)
}
