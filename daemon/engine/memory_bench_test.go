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
	log := slog.New(slog.NewTextHandler(io.Discard, nil))
	open := func() (*store.Store, *engine.Engine, *instrument.Controller) {
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
	st, eng, ctl := open()
	ctx, cancel := context.WithCancel(context.Background())
	var wg sync.WaitGroup
	wg.Add(2)
	go func() { defer wg.Done(); ctl.Run(ctx) }()
	go func() { defer wg.Done(); eng.Run(ctx) }()
	before := heapInUse()
	b.ResetTimer()
	var last scan.Record
	for range n {
		rec, err := eng.Submit(scan.Request{Kind: scan.Timed, Points: 1, Dwell: time.Millisecond})
		if err != nil {
			b.Fatal(err)
		}
		last = rec
	}
	waitState(b, eng, last.ID, scan.Done, 10*time.Minute)
	b.StopTimer()
	live := heapInUse()
	runtime.KeepAlive(eng)
	cancel()
	wg.Wait()
	st.Close()

	st, eng, _ = open()
	defer st.Close()
	loaded := heapInUse()
	runtime.KeepAlive(eng)
	b.ReportMetric(float64(live-before)/float64(n), "live-B/scan")
	b.ReportMetric(float64(loaded-before)/float64(n), "loaded-B/scan")
	b.ReportMetric(0, "ns/op")
}

// heapInUse returns the bytes of live heap objects after a full collection.
func heapInUse() int64 {
	runtime.GC()
	runtime.GC()
	var m runtime.MemStats
	runtime.ReadMemStats(&m)
	return int64(m.HeapAlloc)
}
