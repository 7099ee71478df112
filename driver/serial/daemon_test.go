//go:build linux

package serial_test

import (
	"context"
	"fmt"
	"math"
	"strings"
	"testing"
	"time"

	"goniod/client"
	"goniod/daemon/config"
	"goniod/daemon/server/servertest"
	"goniod/sim"
	"goniod/sim/scpi"
)

// startDaemon runs goniod configured by a configuration file with `driver: serial` on the device.
func startDaemon(t *testing.T, dev *device) *servertest.Daemon {
	t.Helper()
	file, err := config.Parse("goniod.yaml", []byte(fmt.Sprintf(`
driver: serial
drivers:
  serial:
    device: %s
    baud: 115200
    read_timeout: 300ms
    reconnect_max: 200ms
`, dev.link)))
	if err != nil {
		t.Fatal(err)
	}
	return servertest.StartOn(t, nil, servertest.WithConfig(func(f *config.File) {
		f.Driver, f.Drivers = file.Driver, file.Drivers
	}))
}

func submit(t *testing.T, d *servertest.Daemon, r client.ScanRequest) client.Scan {
	t.Helper()
	ctx, cancel := context.WithTimeout(context.Background(), 10*time.Second)
	defer cancel()
	s, err := d.Client.Submit(ctx, r)
	if err != nil {
		t.Fatal(err)
	}
	return s
}

// points reads every stored point of a scan.
func points(t *testing.T, d *servertest.Daemon, id string) []client.Point {
	t.Helper()
	return d.Points(t, id)
}

// checkExactlyOnce: every planned point is stored once, in order, at its planned angle (start + i·step).
func checkExactlyOnce(t *testing.T, pts []client.Point, axis string, from, step float64, n int) {
	t.Helper()
	if len(pts) != n {
		t.Fatalf("%d points stored, want %d", len(pts), n)
	}
	for i, p := range pts {
		got, _ := p.Angle(axis)
		if p.Index != i || math.Abs(got-(from+float64(i)*step)) > 0.0015 {
			t.Fatalf("point %d: index %d, %s %g; want index %d at %g", i, p.Index, axis, got, i, from+float64(i)*step)
		}
	}
}

// TestDaemonScans: goniod on the serial driver runs a coupled and a single-axis scan end to end against the
// simulator on a pseudo-terminal.
func TestDaemonScans(t *testing.T) {
	dev := startDevice(t, sim.Config{Seed: 3, Speed: 1000}, scpi.Options{})
	d := startDaemon(t, dev)
	coupled := submit(t, d, client.ScanRequest{Kind: client.Coupled, From: 20, To: 24, Step: 0.1, Dwell: time.Second,
		Source: &client.Source{KV: 30, MA: 0.8}})
	final, watched := d.WaitEnd(t, coupled.ID)
	if final.State != client.Done || len(watched) != 41 {
		t.Fatalf("coupled scan: %s (%s), %d points watched; want done, 41", final.State, final.Reason, len(watched))
	}
	pts := points(t, d, coupled.ID)
	checkExactlyOnce(t, pts, "theta", 20, 0.1, 41)
	var total uint64
	for _, p := range pts {
		if tt, _ := p.Angle("twotheta"); math.Abs(tt-2*p.Axes[0].Actual) > 0.0015 || p.KV != 30 {
			t.Fatalf("point %d: twotheta %g at theta %g, %g kV", p.Index, tt, p.Axes[0].Actual, p.KV)
		}
		total += p.Counts
	}
	if total == 0 {
		t.Error("no counts in a coupled scan at 30 kV")
	}
	if final.Info.Driver != "serial" || !strings.HasPrefix(final.Info.Identity, "goniod,simulated spectrometer,Cu-LiF(200)") {
		t.Errorf("scan info %+v; want the serial driver and the simulator's identity", final.Info)
	}

	axis := submit(t, d, client.ScanRequest{Kind: client.Axis, Axis: "theta", From: 22, To: 23, Step: 0.05, Dwell: time.Second})
	final, _ = d.WaitEnd(t, axis.ID)
	if final.State != client.Done {
		t.Fatalf("theta scan: %s (%s)", final.State, final.Reason)
	}
	pts = points(t, d, axis.ID)
	checkExactlyOnce(t, pts, "theta", 22, 0.05, 21)
	for _, p := range pts {
		if tt, _ := p.Angle("twotheta"); math.Abs(tt-48) > 0.0015 {
			t.Fatalf("theta scan point %d: twotheta %g, want it held at 48", p.Index, tt)
		}
	}
}

// TestDaemonSurvivesFaults: garbage on the line, a stalled reply, the device vanishing mid-scan and coming
// back. The daemon stays up and reports the link; a scan that pauses resumes; in the end every point is
// stored exactly once.
func TestDaemonSurvivesFaults(t *testing.T) {
	tests := []struct {
		name   string
		faults []scpi.Fault
		down   bool // the link must be seen down
	}{
		{"garbage", []scpi.Fault{{Action: scpi.Noise, Bytes: 64, After: 300 * time.Millisecond},
			{Action: scpi.Garble, After: 500 * time.Millisecond}, {Action: scpi.Garble, After: 700 * time.Millisecond}}, false},
		{"stalled reply", []scpi.Fault{{Action: scpi.Stall, For: time.Second, After: 400 * time.Millisecond}}, false},
		{"device vanishes", []scpi.Fault{{Action: scpi.Drop, For: 700 * time.Millisecond, After: 400 * time.Millisecond}}, true},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			t.Parallel()
			dev := startDevice(t, sim.Config{Seed: 5, Speed: 200}, scpi.Options{Seed: 5})
			d := startDaemon(t, dev)
			s := submit(t, d, client.ScanRequest{Kind: client.Coupled, From: 20, To: 30, Step: 0.05, Dwell: time.Second,
				Source: &client.Source{KV: 30, MA: 0.8}})
			for _, f := range tc.faults {
				dev.srv.Inject(f)
			}
			sawDown, pauses := runToEnd(t, d, s.ID)
			if tc.down && (!sawDown || pauses == 0) {
				t.Errorf("the link was never reported down (%v) or the scan never paused (%d)", sawDown, pauses)
			}
			checkExactlyOnce(t, points(t, d, s.ID), "theta", 20, 0.05, 201)
			t.Logf("%s: resumed %d times, link seen down: %v", tc.name, pauses, sawDown)
		})
	}
}

// runToEnd follows a scan, polling the daemon's state as a monitor would, and resumes it whenever it pauses
// (once the link is up). It returns whether the link was seen down and how often the scan was resumed.
func runToEnd(t *testing.T, d *servertest.Daemon, id string) (sawDown bool, resumes int) {
	t.Helper()
	ctx, cancel := context.WithTimeout(context.Background(), 60*time.Second)
	defer cancel()
	for {
		st, err := d.Client.State(ctx)
		if err != nil {
			t.Fatalf("the daemon does not answer: %v", err)
		}
		sawDown = sawDown || st.Link != "up"
		s, err := d.Client.Scan(ctx, id)
		if err != nil {
			t.Fatal(err)
		}
		switch {
		case s.State == client.Done:
			return sawDown, resumes
		case s.State.Terminal():
			t.Fatalf("scan ended %s: %s", s.State, s.Reason)
		case s.State == client.Paused && st.Link == "up":
			if resumes++; resumes > 10 {
				t.Fatalf("scan paused %d times; last: %s", resumes, s.Reason)
			}
			if _, err := d.Client.Resume(ctx, id); err != nil {
				t.Fatalf("resume after %q: %v", s.Reason, err)
			}
		case s.State == client.Paused && !strings.Contains(s.Reason, "link"):
			t.Logf("paused with the link %s: %s", st.Link, s.Reason)
		}
		time.Sleep(20 * time.Millisecond)
	}
}
