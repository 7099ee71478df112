package engine_test

import (
	"context"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"sync"
	"testing"
	"time"

	"goniod/daemon/engine"
	"goniod/daemon/scan"
)

// Ended scans that nobody watches keep only their state in memory (see BenchmarkHeapPerEndedScan); everything
// else is read back from the store when asked for. Each way in must still see the whole scan.
func TestEndedScansReadBackWhole(t *testing.T) {
	r := startWatchRig(t)
	var ids []string
	for i, label := range []string{"first", "second", "third"} {
		req := timedScan(i + 2)
		req.Label, req.Operator = label, "op"
		rec, err := r.eng.Submit(req)
		if err != nil {
			t.Fatal(err)
		}
		ids = append(ids, rec.ID)
	}
	held, err := r.eng.Submit(timedScan(1))
	if err != nil {
		t.Fatal(err)
	}
	if _, err := r.eng.Pause(held.ID); err != nil { // queued: held at once
		t.Fatal(err)
	}
	for _, id := range ids {
		waitState(t, r.eng, id, scan.Done, 30*time.Second)
	}

	for i, id := range ids {
		rec, err := r.eng.Get(id)
		if err != nil {
			t.Fatal(err)
		}
		if rec.State != scan.Done || rec.PointsDone != i+2 || rec.Request.Label != []string{"first", "second", "third"}[i] ||
			rec.Started.IsZero() || rec.Ended.IsZero() || rec.Info.Driver == "" {
			t.Errorf("%s read back as %+v", id, rec)
		}
		var points []int
		var records []scan.State
		end := false
		err = r.eng.Watch(context.Background(), id, 0, func(ev engine.Event) error {
			if ev.Point != nil {
				points = append(points, int(ev.Point.Index))
			} else {
				records, end = append(records, ev.Record.State), ev.End
			}
			return nil
		})
		if err != nil || !end || len(points) != i+2 || points[len(points)-1] != i+1 || records[0] != scan.Done {
			t.Errorf("watch of ended %s: points %v, records %v, end %v, err %v", id, points, records, end, err)
		}
	}

	// Paging over cold and live scans alike, newest first, with a state filter.
	page, next, err := r.eng.List("", 2, nil)
	if err != nil || len(page) != 2 || page[0].ID != held.ID || page[1].ID != ids[2] || next != ids[2] {
		t.Fatalf("first page %v next %q err %v", recIDs(page), next, err)
	}
	page, next, err = r.eng.List(next, 2, nil)
	if err != nil || len(page) != 2 || page[0].ID != ids[1] || page[1].ID != ids[0] || next != "" {
		t.Fatalf("second page %v next %q err %v", recIDs(page), next, err)
	}
	if page[1].Request.Label != "first" || page[1].PointsDone != 2 {
		t.Errorf("listed cold record %+v", page[1])
	}
	done, _, err := r.eng.List("", 10, []scan.State{scan.Done})
	if err != nil || len(done) != 3 {
		t.Errorf("done scans listed: %v (%v)", recIDs(done), err)
	}
	if n := r.eng.CountByState(); n[scan.Done] != 3 || n[scan.Held] != 1 {
		t.Errorf("counted by state: %v", n)
	}

	// An ended scan refuses operations with its record.
	rec, err := r.eng.Cancel(ids[0])
	if !errors.Is(err, scan.ErrState) || rec.ID != ids[0] || rec.State != scan.Done {
		t.Errorf("cancel of a done scan: %v, record %s %s", err, rec.ID, rec.State)
	}
	if _, err := r.eng.Resume(ids[1]); !errors.Is(err, scan.ErrState) {
		t.Errorf("resume of a done scan: %v", err)
	}
}

// A scan whose end could not be saved stays in memory: the running daemon's truth is that it ended, and the
// record on disk (which a cold scan would be read from) does not say so.
func TestEndNotSavedStaysInMemory(t *testing.T) {
	r := startWatchRig(t)
	// A long scan keeps the runner busy, so that the next one stays queued and holding it is all that happens
	// to it.
	long, err := r.eng.Submit(scan.Request{Kind: scan.Timed, Points: 1000, Dwell: time.Hour})
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() {
		if _, err := r.eng.Cancel(long.ID); err == nil {
			waitState(t, r.eng, long.ID, scan.Cancelled, 30*time.Second)
		}
	})
	waitState(t, r.eng, long.ID, scan.Running, 30*time.Second)
	rec, err := r.eng.Submit(timedScan(1))
	if err != nil {
		t.Fatal(err)
	}
	if held, err := r.eng.Pause(rec.ID); err != nil || held.State != scan.Held {
		t.Fatalf("hold of a queued scan: %s, %v", held.State, err)
	}
	if err := os.RemoveAll(filepath.Join(r.dir, "scans", rec.ID)); err != nil {
		t.Fatal(err)
	}
	got, err := r.eng.Cancel(rec.ID)
	if !errors.Is(err, engine.ErrStorage) || got.State != scan.Cancelled {
		t.Fatalf("cancel with the scan's directory gone: %v, state %s; want a storage error and cancelled", err, got.State)
	}
	again, err := r.eng.Get(rec.ID)
	if err != nil || again.State != scan.Cancelled {
		t.Errorf("after the failed save the scan reads %s (%v), want cancelled", again.State, err)
	}
}

func recIDs(recs []scan.Record) []string {
	var out []string
	for _, r := range recs {
		out = append(out, r.ID)
	}
	return out
}

// A restart reads the records of ended scans and writes none of them: with months of scans in the data
// directory a start would otherwise cost two fsyncs a scan (BenchmarkStartWithHistory).
func TestRestartLeavesEndedRecordsAlone(t *testing.T) {
	dir := t.TempDir()
	st, eng, ctl := openHistory(t, dir)
	runScans(t, eng, ctl, 1, 5)()
	recs, _, err := eng.List("", 1, nil)
	if err != nil || len(recs) != 1 {
		t.Fatalf("%d scans (%v)", len(recs), err)
	}
	rec := recs[0]
	st.Close()
	path := filepath.Join(dir, "scans", rec.ID, "scan.json")
	before, err := os.Stat(path)
	if err != nil {
		t.Fatal(err)
	}
	old := time.Now().Add(-time.Hour).Truncate(time.Second)
	if err := os.Chtimes(path, old, old); err != nil {
		t.Fatal(err)
	}
	st, eng, _ = openHistory(t, dir)
	defer st.Close()
	after, err := os.Stat(path)
	if err != nil {
		t.Fatal(err)
	}
	if !after.ModTime().Equal(old) || after.Size() != before.Size() {
		t.Errorf("the restart rewrote the ended scan's record (modified %v, size %d → %d)", after.ModTime(), before.Size(), after.Size())
	}
	if got, err := eng.Get(rec.ID); err != nil || got.State != scan.Done || got.PointsDone != 5 {
		t.Errorf("after the restart: %s with %d points (%v)", got.State, got.PointsDone, err)
	}
	if n := eng.CountByState(); n[scan.Done] != 1 || len(n) != 1 || eng.QueueLength() != 0 {
		t.Errorf("after the restart the scans count as %v, queue %d", n, eng.QueueLength())
	}
}

// Watches, reads and listings of scans that end meanwhile, all at once: every watch of a scan delivers all
// its points and the end, whether its hub was live, dropped or made again from the store (run with -race).
func TestColdAndWarmConcurrently(t *testing.T) {
	r := startWatchRig(t)
	const scans, watchers = 8, 12
	var ids []string
	for range scans {
		rec, err := r.eng.Submit(timedScan(50))
		if err != nil {
			t.Fatal(err)
		}
		ids = append(ids, rec.ID)
	}
	errs := make(chan error, scans*watchers*3)
	var wg sync.WaitGroup
	for i, id := range ids {
		for w := range watchers {
			wg.Add(1)
			go func() {
				defer wg.Done()
				for round := range 3 {
					n, end := 0, false
					err := r.eng.Watch(context.Background(), id, 0, func(ev engine.Event) error {
						if ev.Point != nil {
							if int(ev.Point.Index) != n {
								return fmt.Errorf("point %d where %d was due", ev.Point.Index, n)
							}
							n++
						}
						end = ev.End
						return nil
					})
					if err == nil && (!end || n != 50) {
						err = fmt.Errorf("%d points, end %v", n, end)
					}
					if err != nil {
						errs <- fmt.Errorf("scan %d watcher %d round %d: %w", i, w, round, err)
					}
					if _, err := r.eng.Get(id); err != nil {
						errs <- err
					}
					if _, _, err := r.eng.List("", 3, nil); err != nil {
						errs <- err
					}
				}
			}()
		}
	}
	wg.Wait()
	close(errs)
	for err := range errs {
		t.Error(err)
	}
	for _, id := range ids {
		if rec, err := r.eng.Get(id); err != nil || rec.State != scan.Done || rec.PointsDone != 50 {
			t.Errorf("%s: %s with %d points (%v)", id, rec.State, rec.PointsDone, err)
		}
	}
}
