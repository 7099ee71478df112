package engine_test

import (
	"context"
	"strings"
	"testing"
	"time"

	"golang.org/x/sys/unix"

	"goniod/client"
)

// A data directory that takes no more data stops the scan cleanly: paused with a clear reason, high voltage
// off, every stored point intact, the queue held. Once the disk takes data again, resume finishes the scan.
// The daemon's file-size limit (RLIMIT_FSIZE) makes its writes fail the way a full disk does, also for root,
// whom a read-only directory would not stop.
func TestDiskFullStopsTheScanCleanly(t *testing.T) {
	bin := buildDaemon(t)
	data := t.TempDir()
	d := startDaemon(t, bin, data)
	ctx := context.Background()
	const limit = 48 << 10 // bytes: about 300 points
	setFileSizeLimit(t, d, limit)
	s, err := d.client.Submit(ctx, client.ScanRequest{Kind: client.Coupled, From: 10, To: 55, Step: 0.05, Dwell: time.Second,
		Source: &client.Source{KV: 30, MA: 0.8}})
	if err != nil {
		t.Fatal(err)
	}
	next, err := d.client.Submit(ctx, client.ScanRequest{Kind: client.Timed, Points: 3, Dwell: time.Second})
	if err != nil {
		t.Fatal(err)
	}
	paused := pollScan(t, d.client, s.ID, "paused", func(s client.Scan) bool { return s.State == client.Paused })
	t.Logf("stopped after %d of %d points: %s", paused.PointsDone, paused.PointsTotal, paused.Reason)
	for _, says := range []string{"storing point", "file too large", "intact", "high voltage off", "resume"} {
		if !strings.Contains(paused.Reason, says) {
			t.Errorf("reason %q does not say %q", paused.Reason, says)
		}
	}
	if st, err := d.client.State(ctx); err != nil || st.HighVoltage {
		t.Errorf("high voltage %v after the disk filled (%v)", st.HighVoltage, err)
	}
	n, torn := checkDisk(t, data, s.ID, nil)
	if torn != 0 || n != paused.PointsDone || n == 0 {
		t.Fatalf("disk holds %d points (torn tail %d), the daemon says %d", n, torn, paused.PointsDone)
	}
	checkContiguous(t, apiPoints(t, d.client, s.ID), n)
	time.Sleep(100 * time.Millisecond)
	if q, _ := d.client.Scan(ctx, next.ID); q.State != client.Queued {
		t.Errorf("the next scan is %s while the disk is full, want it queued behind the paused one", q.State)
	}

	setFileSizeLimit(t, d, unix.RLIM_INFINITY)
	if _, err := d.client.Resume(ctx, s.ID); err != nil {
		t.Fatal(err)
	}
	if final := waitEnd(t, d.client, s.ID); final.State != client.Done {
		t.Fatalf("after the disk recovered the scan ended %s: %s", final.State, final.Reason)
	}
	checkContiguous(t, apiPoints(t, d.client, s.ID), 901)
	if final := waitEnd(t, d.client, next.ID); final.State != client.Done {
		t.Fatalf("the next scan ended %s", final.State)
	}
}

// setFileSizeLimit limits the size of any file the daemon writes (RLIMIT_FSIZE); writes beyond it fail with
// EFBIG (the Go runtime ignores the SIGXFSZ that comes with them).
func setFileSizeLimit(t *testing.T, p *daemonProcess, bytes uint64) {
	t.Helper()
	lim := &unix.Rlimit{Cur: bytes, Max: unix.RLIM_INFINITY}
	if err := unix.Prlimit(p.cmd.Process.Pid, unix.RLIMIT_FSIZE, lim, nil); err != nil {
		t.Fatalf("prlimit: %v", err)
	}
}
