package main

import (
	"context"
	"encoding/json"
	"math"
	"strings"
	"testing"
	"time"

	"goniod/client"
	"goniod/daemon/server/servertest"
)

// TestAnalyzeCommands: `gonio analyze` on a simulated first-order Cu Kα scan on LiF(200) prints tables and
// JSON, saves results that --saved shows again, and refuses bad flags with the usage exit code. Reference:
// Cu Kα1 8.0478227 keV (NIST SRD 128), LiF d(200) = 0.201315 nm (Wyckoff via xraylib), hc = 1.239841984
// keV·nm (CODATA 2018): θ = 22.497°.
func TestAnalyzeCommands(t *testing.T) {
	d := servertest.Start(t)
	addr, c := d.Addr, d.Client
	ctx := context.Background()
	s, err := c.Submit(ctx, client.ScanRequest{Kind: client.Coupled, From: 21.9, To: 23.1, Step: 0.01, Dwell: time.Second,
		Source: &client.Source{KV: 30, MA: 0.8}})
	if err != nil {
		t.Fatal(err)
	}
	if got, _ := d.WaitEnd(t, s.ID); got.State != client.Done {
		t.Fatalf("scan %s ended %s: %s", s.ID, got.State, got.Reason)
	}
	theta := math.Asin(1.239841984/8.0478227/(2*0.402630/2)) * 180 / math.Pi

	code, out, errs := run(t, addr, "analyze", "lines", s.ID)
	if code != exitOK || !strings.Contains(out, "Kα1, n = 1") || !strings.Contains(out, "residual") {
		t.Fatalf("analyze lines: exit %d, stdout %q, stderr %q", code, out, errs)
	}
	code, out, errs = run(t, addr, "analyze", "lines", s.ID, "--saved", "--output", "json")
	var saved client.SavedResult
	if code != exitOK || json.Unmarshal([]byte(out), &saved) != nil || saved.Lines == nil {
		t.Fatalf("analyze lines --saved: exit %d, stdout %q, stderr %q", code, out, errs)
	}
	var ka1 *client.LineMatch
	for k, m := range saved.Lines.Matches {
		if m.Line == "Kα1" && m.Order == 1 {
			ka1 = &saved.Lines.Matches[k]
		}
	}
	if ka1 == nil || math.Abs(ka1.Peak.CentreDeg.Value-theta) > 0.01 {
		t.Errorf("saved Kα1, n = 1: %+v; want a centre near %.4f°", ka1, theta)
	}
	code, out, _ = run(t, addr, "analyze", "width", s.ID, "--output", "json")
	var w client.SavedResult
	if code != exitOK || json.Unmarshal([]byte(out), &w) != nil || w.Width == nil || !(w.Width.FWHMFitDeg.Value > 0) {
		t.Errorf("analyze width: exit %d, %q", code, out)
	}
	code, out, _ = run(t, addr, "analyze", "peaks", s.ID, "--no-save")
	if code != exitOK || !strings.Contains(out, "centre (°)") {
		t.Errorf("analyze peaks: exit %d, %q", code, out)
	}
	if code, _, errs := run(t, addr, "analyze", "peaks", s.ID, "--shape", "triangle"); code != exitUsage {
		t.Errorf("--shape triangle: exit %d (%s), want %d", code, errs, exitUsage)
	}
	if code, _, errs := run(t, addr, "analyze", "peaks", s.ID, "--significance", "-2"); code != exitUsage ||
		!strings.Contains(errs, "significance") {
		t.Errorf("--significance -2: exit %d, stderr %q", code, errs)
	}
	if code, _, _ := run(t, addr, "analyze", "limit", s.ID, "--saved"); code != exitNotFound {
		t.Errorf("unsaved limit: exit %d, want %d", code, exitNotFound)
	}
}
