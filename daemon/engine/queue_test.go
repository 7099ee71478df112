package engine_test

import (
	"context"
	"errors"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"goniod/client"
	"goniod/daemon/server/servertest"
)

// slowScan is a coupled scan of n points of 1 s dwell; at simulator speed 20 a point takes about 50 ms.
func slowScan(n int) client.ScanRequest {
	return client.ScanRequest{Kind: client.Coupled, From: 20, To: 20 + float64(n-1)*0.1, Step: 0.1, Dwell: time.Second,
		Source: &client.Source{KV: 30, MA: 0.8}}
}

// The queue runs one scan at a time in order. Pause and cancel of a running scan take effect between points
// and switch high voltage off; a paused scan holds the queue; resume continues from the next point; a queued
// scan is cancelled, or held by a pause, at once; release lets a held scan run.
func TestPauseResumeCancel(t *testing.T) {
	d := servertest.Start(t, servertest.WithSim("speed", 20.0), servertest.WithSim("seed", int64(2)))
	ctx := context.Background()
	a, err := d.Client.Submit(ctx, slowScan(40))
	if err != nil {
		t.Fatal(err)
	}
	b, _ := d.Client.Submit(ctx, slowScan(3))
	c, _ := d.Client.Submit(ctx, slowScan(3))
	waitScanPoints(t, d, a.ID, 3)
	if s, err := d.Client.Scan(ctx, b.ID); err != nil || s.State != client.Queued {
		t.Fatalf("second scan is %s while the first runs: %v", s.State, err)
	}
	if s, err := d.Client.Pause(ctx, b.ID); err != nil || s.State != client.Held {
		t.Fatalf("pause of a queued scan: %s, %v; want held", s.State, err)
	}
	if _, err := d.Client.Pause(ctx, a.ID); err != nil {
		t.Fatal(err)
	}
	paused := waitScanState(t, d, a.ID, client.Paused)
	if highVoltage(t, d) {
		t.Error("high voltage on after a pause")
	}
	time.Sleep(150 * time.Millisecond)
	if s, _ := d.Client.Scan(ctx, c.ID); s.State != client.Queued {
		t.Fatalf("queued scan is %s while the scan before it is paused", s.State)
	}
	if s, _ := d.Client.Scan(ctx, a.ID); s.PointsDone != paused.PointsDone {
		t.Fatalf("a paused scan went on from %d to %d points", paused.PointsDone, s.PointsDone)
	}
	if _, err := d.Client.Release(ctx, a.ID); !errors.Is(err, client.ErrRefused) || !strings.Contains(err.Error(), "paused") {
		t.Errorf("release of a paused scan: %v, want a refusal naming its state", err)
	}
	if _, err := d.Client.Resume(ctx, a.ID); err != nil {
		t.Fatal(err)
	}
	waitScanPoints(t, d, a.ID, paused.PointsDone+3)
	if s, err := d.Client.Cancel(ctx, c.ID); err != nil || s.State != client.Cancelled {
		t.Fatalf("cancel of a queued scan: %s, %v", s.State, err)
	}
	final, _ := d.WaitEnd(t, a.ID)
	if final.State != client.Done {
		t.Fatalf("resumed scan ended %s: %s", final.State, final.Reason)
	}
	checkContiguous(t, readPoints(t, d, a.ID), 40)
	time.Sleep(100 * time.Millisecond)
	if s, _ := d.Client.Scan(ctx, b.ID); s.State != client.Held || s.PointsDone != 0 {
		t.Fatalf("held scan is %s with %d points without a release", s.State, s.PointsDone)
	}
	if _, err := d.Client.Release(ctx, b.ID); err != nil {
		t.Fatal(err)
	}
	if final, _ := d.WaitEnd(t, b.ID); final.State != client.Done {
		t.Fatalf("released scan ended %s", final.State)
	}

	// Cancel of a running scan: between points, high voltage off, the points taken stay.
	e, _ := d.Client.Submit(ctx, slowScan(40))
	waitScanPoints(t, d, e.ID, 2)
	if _, err := d.Client.Cancel(ctx, e.ID); err != nil {
		t.Fatal(err)
	}
	final, _ = d.WaitEnd(t, e.ID)
	if final.State != client.Cancelled || highVoltage(t, d) {
		t.Fatalf("cancelled scan %s, high voltage %v", final.State, highVoltage(t, d))
	}
	checkContiguous(t, readPoints(t, d, e.ID), final.PointsDone)
	if _, err := d.Client.Resume(ctx, e.ID); !errors.Is(err, client.ErrRefused) {
		t.Errorf("resume of a cancelled scan: %v, want a refusal", err)
	}
}

// A daemon stopped mid-scan marks the scan interrupted with its points intact and holds the queued ones; after
// the restart nothing starts by itself and high voltage is off; resume and release run them to the end.
func TestRestartInterruptsAndHolds(t *testing.T) {
	d := servertest.Start(t, servertest.WithSim("speed", 20.0))
	ctx := context.Background()
	a, _ := d.Client.Submit(ctx, slowScan(30))
	b, _ := d.Client.Submit(ctx, slowScan(3))
	waitScanPoints(t, d, a.ID, 4)
	d.Stop(t)
	d = servertest.Start(t, servertest.WithSim("speed", 20.0), servertest.WithData(d.Data))
	time.Sleep(200 * time.Millisecond)
	ia, err := d.Client.Scan(ctx, a.ID)
	if err != nil {
		t.Fatal(err)
	}
	hb, _ := d.Client.Scan(ctx, b.ID)
	if ia.State != client.Interrupted || hb.State != client.Held || hb.PointsDone != 0 {
		t.Fatalf("after a restart: %s is %s (%s), %s is %s", a.ID, ia.State, ia.Reason, b.ID, hb.State)
	}
	if !strings.Contains(ia.Reason, "resume") || !strings.Contains(hb.Reason, "release") {
		t.Errorf("reasons do not say what to do: %q, %q", ia.Reason, hb.Reason)
	}
	checkContiguous(t, readPoints(t, d, a.ID), ia.PointsDone)
	if highVoltage(t, d) {
		t.Error("high voltage on after a restart")
	}
	if _, err := d.Client.Resume(ctx, a.ID); err != nil {
		t.Fatal(err)
	}
	if final, _ := d.WaitEnd(t, a.ID); final.State != client.Done {
		t.Fatalf("resumed scan ended %s", final.State)
	}
	checkContiguous(t, readPoints(t, d, a.ID), 30)
	if s, _ := d.Client.Scan(ctx, b.ID); s.State != client.Held {
		t.Fatalf("held scan is %s without a release", s.State)
	}
	if _, err := d.Client.Release(ctx, b.ID); err != nil {
		t.Fatal(err)
	}
	if final, _ := d.WaitEnd(t, b.ID); final.State != client.Done {
		t.Fatalf("released scan ended %s", final.State)
	}
}

// Manual control uses the scans' limits and is refused, naming the scan, while a scan runs or is paused;
// switching high voltage off is always allowed (the scan pauses). A moved axis stays for an axis scan.
func TestManualControl(t *testing.T) {
	d := servertest.Start(t, servertest.WithSim("speed", 20.0), servertest.WithSim("max_power_w", 30.0))
	ctx := context.Background()
	for _, bad := range []struct {
		axis  string
		deg   float64
		field string
	}{{"twotheta", 171, "angle_deg"}, {"theta", math.NaN(), "angle_deg"}, {"omega", 1, "axis"}} {
		_, err := d.Client.Move(ctx, bad.axis, bad.deg)
		if !errors.Is(err, client.ErrInvalid) || !strings.Contains(err.Error(), bad.field) {
			t.Errorf("move %s to %g: %v, want an InvalidArgument naming %s", bad.axis, bad.deg, err, bad.field)
		}
	}
	kv, ma := 35.0, 0.9
	if _, err := d.Client.SetSource(ctx, client.SourceChange{KV: &kv, MA: &ma}); !errors.Is(err, client.ErrInvalid) || !strings.Contains(err.Error(), "30 W") {
		t.Errorf("35 kV × 0.9 mA on a 30 W tube: %v, want a refusal naming the rating", err)
	}

	s, _ := d.Client.Submit(ctx, slowScan(40))
	waitScanPoints(t, d, s.ID, 2)
	kv = 20
	on := true
	refusals := map[string]error{}
	_, refusals["move"] = d.Client.Move(ctx, "theta", 10)
	_, refusals["source"] = d.Client.SetSource(ctx, client.SourceChange{KV: &kv})
	_, refusals["high voltage on"] = d.Client.SetSource(ctx, client.SourceChange{HighVoltage: &on})
	_, refusals["count"] = d.Client.Count(ctx, time.Second)
	_, refusals["align"] = d.Client.Align(ctx, client.AlignOptions{Source: &client.Source{KV: 30, MA: 1}})
	for what, err := range refusals {
		if !errors.Is(err, client.ErrRefused) || !strings.Contains(err.Error(), s.ID) || !strings.Contains(err.Error(), "running") {
			t.Errorf("%s during a scan: %v, want a refusal naming the running scan", what, err)
		}
	}
	off := false
	if _, err := d.Client.SetSource(ctx, client.SourceChange{HighVoltage: &off}); err != nil {
		t.Fatalf("high voltage off during a scan: %v", err)
	}
	paused := waitScanState(t, d, s.ID, client.Paused)
	if !strings.Contains(paused.Reason, "high voltage") {
		t.Errorf("pause reason %q does not say why", paused.Reason)
	}
	if _, err := d.Client.Move(ctx, "theta", 10); !errors.Is(err, client.ErrRefused) || !strings.Contains(err.Error(), "paused") {
		t.Errorf("move while a scan is paused: %v", err)
	}
	if _, err := d.Client.Cancel(ctx, s.ID); err != nil {
		t.Fatal(err)
	}

	// The detector parked at 2θ by hand stays there through a rocking curve of the crystal.
	if _, err := d.Client.Move(ctx, "twotheta", 44.99); err != nil {
		t.Fatal(err)
	}
	r, err := d.Client.Submit(ctx, client.ScanRequest{Kind: client.Axis, Axis: "theta", From: 22, To: 23, Step: 0.05, Dwell: time.Second})
	if err != nil {
		t.Fatal(err)
	}
	final, _ := d.WaitEnd(t, r.ID)
	pts := readPoints(t, d, r.ID)
	checkContiguous(t, pts, 21)
	for _, p := range pts {
		for _, a := range p.Axes {
			if a.Name == "twotheta" && (a.Set != 44.99 || math.Abs(a.Actual-44.99) > 0.001) {
				t.Fatalf("point %d: twotheta set %g read %g during a theta scan, parked at 44.99", p.Index, a.Set, a.Actual)
			}
		}
	}
	st, _ := d.Client.State(ctx)
	for _, a := range st.Axes {
		if a.Name == "twotheta" && math.Abs(a.Position-44.99) > 0.001 {
			t.Errorf("after the %s rocking curve twotheta is at %g", final.State, a.Position)
		}
	}
}

// Listing is paged newest first, with a state filter; every scan appears on exactly one page.
func TestPagedListing(t *testing.T) {
	d := servertest.Start(t)
	ctx := context.Background()
	var ids []string
	for i := 0; i < 7; i++ {
		s, err := d.Client.Submit(ctx, client.ScanRequest{Kind: client.Timed, Points: 2, Dwell: time.Second})
		if err != nil {
			t.Fatal(err)
		}
		ids = append(ids, s.ID)
		d.WaitEnd(t, s.ID)
	}
	if _, err := d.Client.Cancel(ctx, ids[0]); !errors.Is(err, client.ErrRefused) {
		t.Fatalf("cancel of a done scan: %v", err)
	}
	var got []string
	token := ""
	for page := 0; ; page++ {
		scans, next, err := d.Client.List(ctx, client.ListOptions{PageSize: 3, PageToken: token})
		if err != nil {
			t.Fatal(err)
		}
		if len(scans) > 3 {
			t.Fatalf("page %d has %d scans", page, len(scans))
		}
		for _, s := range scans {
			got = append(got, s.ID)
		}
		if next == "" {
			break
		}
		token = next
	}
	if len(got) != 7 {
		t.Fatalf("pages held %v", got)
	}
	for i, id := range got {
		if id != ids[6-i] {
			t.Fatalf("listing %v is not newest first %v", got, ids)
		}
	}
	done, _, err := d.Client.List(ctx, client.ListOptions{States: []client.State{client.Queued}})
	if err != nil || len(done) != 0 {
		t.Errorf("queued filter: %d scans, %v", len(done), err)
	}
}

// Bad series, timed, list and tube requests are refused with InvalidArgument naming the field; nothing is
// queued.
func TestBadRequestsQueueNothing(t *testing.T) {
	d := servertest.Start(t, servertest.WithSim("max_power_w", 30.0))
	ctx := context.Background()
	scanOK := client.ScanRequest{Kind: client.Coupled, From: 10, To: 20, Step: 0.1, Dwell: time.Second}
	series := []struct {
		name, field string
		req         client.SeriesRequest
	}{
		{"empty series", "series.sources", client.SeriesRequest{Scan: scanOK}},
		{"series beyond the voltage rating", "series.sources[1].kv", client.SeriesRequest{Scan: scanOK, Sources: []client.Source{{KV: 20, MA: 0.5}, {KV: 36, MA: 0.5}}}},
		{"series beyond the power rating", "series.sources[0]", client.SeriesRequest{Scan: scanOK, Sources: []client.Source{{KV: 35, MA: 0.9}}}},
		{"series with a bad scan", "series.scan.coupled.step_deg", client.SeriesRequest{Scan: client.ScanRequest{Kind: client.Coupled, From: 10, To: 20, Dwell: time.Second}, Sources: []client.Source{{KV: 20, MA: 0.5}}}},
		{"series with a negative settle", "series.settle", client.SeriesRequest{Scan: scanOK, Sources: []client.Source{{KV: 20, MA: 0.5}}, Settle: -time.Second}},
	}
	for _, tc := range series {
		_, err := d.Client.SubmitSeries(ctx, tc.req)
		checkFieldError(t, tc.name, err, tc.field)
	}
	scans := []struct {
		name, field string
		req         client.ScanRequest
	}{
		{"timed with no points", "timed.points", client.ScanRequest{Kind: client.Timed, Dwell: time.Second}},
		{"timed beyond a limit", "timed.at_deg.theta", client.ScanRequest{Kind: client.Timed, Points: 2, Dwell: time.Second, At: map[string]float64{"theta": -20}}},
		{"empty list", "list.positions", client.ScanRequest{Kind: client.List, Dwell: time.Second}},
		{"list at an unknown axis", "list.positions[0]", client.ScanRequest{Kind: client.List, Dwell: time.Second, Positions: []map[string]float64{{"chi": 3}}}},
		{"tube power", "source", client.ScanRequest{Kind: client.Timed, Points: 2, Dwell: time.Second, Source: &client.Source{KV: 35, MA: 0.9}}},
		{"slice too short", "counting.min_dwell", client.ScanRequest{Kind: client.Timed, Points: 2, Dwell: time.Second, RelativeError: 0.01, MinDwell: time.Millisecond}},
	}
	for _, tc := range scans {
		_, err := d.Client.Submit(ctx, tc.req)
		checkFieldError(t, tc.name, err, tc.field)
	}
	if _, err := d.Client.Count(ctx, -time.Second); !errors.Is(err, client.ErrInvalid) {
		t.Errorf("count for -1 s: %v", err)
	}
	list, _, err := d.Client.List(ctx, client.ListOptions{})
	if err != nil || len(list) != 0 {
		t.Errorf("%d scans queued by refused requests (%v)", len(list), err)
	}
}

func checkFieldError(t *testing.T, name string, err error, field string) {
	t.Helper()
	if !errors.Is(err, client.ErrInvalid) {
		t.Errorf("%s: %v, want InvalidArgument", name, err)
		return
	}
	for _, f := range client.FieldErrors(err) {
		if f.Field == field && f.Reason != "" {
			return
		}
	}
	t.Errorf("%s: %v does not name %s", name, client.FieldErrors(err), field)
}

// The queue is first in, first out, one scan at a time: each scan starts after the one before it ended.
func TestQueueRunsInOrder(t *testing.T) {
	d := servertest.Start(t, servertest.WithSim("speed", 200.0))
	ctx := context.Background()
	var ids []string
	for _, n := range []int{6, 2, 4, 3} {
		s, err := d.Client.Submit(ctx, slowScan(n))
		if err != nil {
			t.Fatal(err)
		}
		ids = append(ids, s.ID)
	}
	var prev client.Scan
	for i, id := range ids {
		s, _ := d.WaitEnd(t, id)
		if s.State != client.Done {
			t.Fatalf("scan %s ended %s", id, s.State)
		}
		if i > 0 && s.Started.Before(prev.Ended) {
			t.Errorf("scan %s started at %v, before %s ended at %v", id, s.Started.Format(time.StampMicro), prev.ID, prev.Ended.Format(time.StampMicro))
		}
		prev = s
	}
}

// A points file damaged before its last line (not a crash's torn tail) fails its scan at start and is left
// as it was; the daemon starts and the other scans go on.
func TestDamagedPointsFileFailsOnlyItsScan(t *testing.T) {
	d := servertest.Start(t, servertest.WithSim("speed", 20.0))
	ctx := context.Background()
	a, _ := d.Client.Submit(ctx, slowScan(30))
	b, _ := d.Client.Submit(ctx, slowScan(3))
	waitScanPoints(t, d, a.ID, 6)
	d.Stop(t)
	path := filepath.Join(d.Data, "scans", a.ID, "points.csv")
	body, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	lines := strings.SplitAfter(string(body), "\n")
	lines[3] = "3,damaged\n"
	damaged := strings.Join(lines, "")
	if err := os.WriteFile(path, []byte(damaged), 0o640); err != nil {
		t.Fatal(err)
	}
	d = servertest.Start(t, servertest.WithSim("speed", 20.0), servertest.WithData(d.Data))
	fa, err := d.Client.Scan(ctx, a.ID)
	if err != nil {
		t.Fatal(err)
	}
	if fa.State != client.Failed || !strings.Contains(fa.Reason, "damaged") {
		t.Fatalf("scan with a damaged file is %s (%s), want failed naming the damage", fa.State, fa.Reason)
	}
	if after, _ := os.ReadFile(path); string(after) != damaged {
		t.Error("the damaged file was changed")
	}
	if _, err := d.Client.Release(ctx, b.ID); err != nil {
		t.Fatal(err)
	}
	if final, _ := d.WaitEnd(t, b.ID); final.State != client.Done {
		t.Fatalf("the other scan ended %s", final.State)
	}
}
