package engine_test

import (
	"context"
	"testing"
	"time"

	"goniod/client"
	"goniod/daemon/server/servertest"
)

func readPoints(t *testing.T, d *servertest.Daemon, id string) []client.Point {
	t.Helper()
	st, err := d.Client.Points(context.Background(), id, 0, 0)
	if err != nil {
		t.Fatal(err)
	}
	var out []client.Point
	for p := range st.C {
		out = append(out, p)
	}
	if err := st.Err(); err != nil {
		t.Fatal(err)
	}
	return out
}

// waitScanState polls a scan until it is in state (or fails the test after 20 s).
func waitScanState(t *testing.T, d *servertest.Daemon, id string, state client.State) client.Scan {
	t.Helper()
	deadline := time.Now().Add(20 * time.Second)
	for {
		s, err := d.Client.Scan(context.Background(), id)
		if err != nil {
			t.Fatal(err)
		}
		if s.State == state {
			return s
		}
		if time.Now().After(deadline) {
			t.Fatalf("scan %s is %s (%s), waited for %s", id, s.State, s.Reason, state)
		}
		time.Sleep(5 * time.Millisecond)
	}
}

// waitScanPoints polls a running scan until it has at least n points.
func waitScanPoints(t *testing.T, d *servertest.Daemon, id string, n int) client.Scan {
	t.Helper()
	deadline := time.Now().Add(20 * time.Second)
	for {
		s, err := d.Client.Scan(context.Background(), id)
		if err != nil {
			t.Fatal(err)
		}
		if s.PointsDone >= n {
			return s
		}
		if s.State.Terminal() || time.Now().After(deadline) {
			t.Fatalf("scan %s is %s with %d points, waited for %d", id, s.State, s.PointsDone, n)
		}
		time.Sleep(5 * time.Millisecond)
	}
}

// highVoltage reads the tube's high voltage from the daemon's state, refreshed by a manual-free call.
func highVoltage(t *testing.T, d *servertest.Daemon) bool {
	t.Helper()
	st, err := d.Client.State(context.Background())
	if err != nil {
		t.Fatal(err)
	}
	return st.HighVoltage
}

// checkContiguous fails unless the points have indexes 0..n-1, each once, in order.
func checkContiguous(t *testing.T, pts []client.Point, n int) {
	t.Helper()
	if len(pts) != n {
		t.Fatalf("%d points, want %d", len(pts), n)
	}
	for i, p := range pts {
		if p.Index != i {
			t.Fatalf("point %d has index %d", i, p.Index)
		}
	}
}
