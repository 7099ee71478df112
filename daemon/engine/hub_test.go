package engine

import (
	"context"
	"fmt"
	"io"
	"log/slog"
	"testing"
	"time"

	"google.golang.org/protobuf/types/known/timestamppb"

	"goniod/daemon/scan"
	"goniod/daemon/store"
	goniodv1 "goniod/proto/goniod/v1"
)

// hubRig is a scan in a real store with its hub, without a runner: the test plays the runner's part.
type hubRig struct {
	e   *Engine
	h   *hub
	app *store.Appender
	rec scan.Record
}

func newHubRig(t *testing.T) *hubRig {
	t.Helper()
	log := slog.New(slog.NewTextHandler(io.Discard, nil))
	st, err := store.Open(t.TempDir(), log)
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { st.Close() })
	rec := scan.Record{ID: st.NewScanID(), State: scan.Running, PointsTotal: 1 << 20, Request: scan.Request{Kind: scan.Timed}}
	if err := st.Create(&rec, goniodv1.NewPointTable([]string{"theta"}, nil).Header()); err != nil {
		t.Fatal(err)
	}
	app, _, err := st.OpenAppender(rec.ID)
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { app.Close() })
	h := newHub(rec, 0)
	en := &entry{id: rec.ID}
	en.hub.Store(h)
	e := &Engine{store: st, log: log, scans: map[string]*entry{rec.ID: en}}
	return &hubRig{e: e, h: h, app: app, rec: rec}
}

// add stores points up to index n (exclusive) and publishes them, as the runner does: durable first.
func (r *hubRig) add(t *testing.T, n int) {
	t.Helper()
	var pts []*goniodv1.Point
	for i := r.app.Count(); i < n; i++ {
		pts = append(pts, &goniodv1.Point{Index: uint32(i), DwellS: 1, Counts: uint64(i % 97), Time: timestamppb.New(time.Unix(int64(i), 0)),
			Axes: []*goniodv1.AxisReading{{Name: "theta", SetDeg: float64(i), ActualDeg: float64(i)}}})
	}
	if err := r.app.Append(pts...); err != nil {
		t.Fatal(err)
	}
	r.h.publish(pts...)
}

func (r *hubRig) state(t *testing.T, s scan.State) {
	t.Helper()
	r.rec.State, r.rec.PointsDone = s, r.app.Count()
	r.h.setRecord(r.rec)
	if err := r.e.store.SaveRecord(&r.rec); err != nil {
		t.Fatal(err)
	}
}

// event is a watch event in a comparable form: a point index, or a state.
func event(ev Event) string {
	if ev.Point != nil {
		return fmt.Sprint(ev.Point.Index)
	}
	if ev.End {
		return "end:" + string(ev.Record.State)
	}
	return string(ev.Record.State)
}

// TestWatchBehindTheRing: a watcher that starts, or falls, further behind than the in-memory ring reads the
// store, then memory, then waits for live points; state changes come in their place among the points.
func TestWatchBehindTheRing(t *testing.T) {
	r := newHubRig(t)
	r.add(t, ringSize+1500) // points 0..1499 are no longer in memory
	gate := make(chan struct{})
	events := make(chan string, 4*ringSize)
	done := make(chan error, 1)
	go func() {
		done <- r.e.Watch(context.Background(), r.rec.ID, 0, func(ev Event) error {
			if ev.Point != nil && ev.Point.Index == 2000 {
				<-gate // stall in the middle, long enough for the ring to move past this watcher
			}
			events <- event(ev)
			return nil
		})
	}()
	var got []string
	next := func() string {
		select {
		case s := <-events:
			got = append(got, s)
			return s
		case err := <-done:
			t.Fatalf("watch ended early: %v (after %d events)", err, len(got))
		case <-time.After(10 * time.Second):
			t.Fatalf("no event after %d", len(got))
		}
		return ""
	}
	for len(got) < 2001 { // the record and points 0..1999
		next()
	}
	r.add(t, ringSize+2100)
	r.state(t, scan.Paused) // after point ringSize+2099
	r.state(t, scan.Running)
	r.add(t, 3*ringSize) // point 2000 is long out of the ring now
	close(gate)
	r.add(t, 3*ringSize+10)
	r.state(t, scan.Done)
	select {
	case err := <-done:
		if err != nil {
			t.Fatal(err)
		}
	case <-time.After(10 * time.Second):
		t.Fatal("watch did not end")
	}
	for len(events) > 0 {
		got = append(got, <-events)
	}
	var want []string
	want = append(want, "running")
	for i := range 3*ringSize + 10 {
		if i == ringSize+2100 {
			want = append(want, "paused", "running")
		}
		want = append(want, fmt.Sprint(i))
	}
	want = append(want, "end:done")
	if len(got) != len(want) {
		t.Fatalf("%d events, want %d", len(got), len(want))
	}
	for i := range want {
		if got[i] != want[i] {
			t.Fatalf("event %d is %s, want %s (around: %v)", i, got[i], want[i], got[max(i-3, 0):min(i+3, len(got))])
		}
	}
}

// TestWatchFromIndex: a watch from a later index replays from there; one beyond the last point gets the end.
func TestWatchFromIndex(t *testing.T) {
	r := newHubRig(t)
	r.add(t, 50)
	r.state(t, scan.Done)
	for _, c := range []struct {
		from  int
		first string
		n     int
	}{{0, "0", 50}, {37, "37", 13}, {49, "49", 1}, {50, "", 0}, {1000, "", 0}} {
		var got []string
		err := r.e.Watch(context.Background(), r.rec.ID, c.from, func(ev Event) error { got = append(got, event(ev)); return nil })
		if err != nil {
			t.Fatal(err)
		}
		if got[0] != "done" || got[len(got)-1] != "end:done" || len(got) != c.n+2 {
			t.Fatalf("from %d: %d events %v…, want the record, %d points, the end", c.from, len(got), got[:min(len(got), 4)], c.n)
		}
		if c.n > 0 && got[1] != c.first {
			t.Errorf("from %d: first point %s", c.from, got[1])
		}
	}
}

// TestWatchStopsWithItsContext: a watch of a scan that does not move ends when its context does.
func TestWatchStopsWithItsContext(t *testing.T) {
	r := newHubRig(t)
	r.add(t, 3)
	ctx, cancel := context.WithCancel(context.Background())
	n := 0
	go func() {
		time.Sleep(50 * time.Millisecond)
		cancel()
	}()
	err := r.e.Watch(ctx, r.rec.ID, 0, func(Event) error { n++; return nil })
	if err != context.Canceled || n != 4 {
		t.Fatalf("watch returned %v after %d events, want context.Canceled after the record and 3 points", err, n)
	}
}
