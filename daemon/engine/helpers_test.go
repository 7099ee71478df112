package engine_test

import (
	"context"
	"fmt"
	"testing"
	"time"

	"goniod/client"
	"goniod/daemon/server/servertest"
)

func readPoints(t *testing.T, d *servertest.Daemon, id string) []client.Point {
	t.Helper()
	return apiPoints(t, d.Client, id)
}

func apiPoints(t *testing.T, c *client.Client, id string) []client.Point {
	t.Helper()
	return servertest.ReadPoints(t, c, id)
}

// waitScanState polls a scan until it is in state.
func waitScanState(t *testing.T, d *servertest.Daemon, id string, state client.State) client.Scan {
	t.Helper()
	return pollScan(t, d.Client, id, string(state), func(s client.Scan) bool { return s.State == state })
}

// waitScanPoints polls a running scan until it has at least n points.
func waitScanPoints(t *testing.T, d *servertest.Daemon, id string, n int) client.Scan {
	t.Helper()
	return pollScan(t, d.Client, id, fmt.Sprintf("%d points", n), func(s client.Scan) bool { return s.PointsDone >= n })
}

// pollScan polls a scan until ok holds, failing the test after 30 s or when the scan ends first.
func pollScan(t *testing.T, c *client.Client, id, what string, ok func(client.Scan) bool) client.Scan {
	t.Helper()
	deadline := time.Now().Add(30 * time.Second)
	for {
		s, err := c.Scan(context.Background(), id)
		if err != nil {
			t.Fatal(err)
		}
		if ok(s) {
			return s
		}
		if s.State.Terminal() || time.Now().After(deadline) {
			t.Fatalf("scan %s is %s with %d points (%s); waited for %s", id, s.State, s.PointsDone, s.Reason, what)
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
