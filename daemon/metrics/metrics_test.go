package metrics

import (
	"bytes"
	"context"
	"flag"
	"io"
	"log/slog"
	"net/http/httptest"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"
	"time"

	"github.com/prometheus/client_golang/prometheus"
	"github.com/prometheus/client_golang/prometheus/promhttp"
	"github.com/prometheus/client_golang/prometheus/testutil"

	"goniod/daemon/instrument"
	"goniod/daemon/scan"
	goniodv1 "goniod/proto/goniod/v1"
	"goniod/sim"
)

var update = flag.Bool("update", false, "rewrite the golden exposition files")

type fakeScans []scan.Record

func (f fakeScans) CountByState() map[scan.State]int {
	out := map[scan.State]int{}
	for _, r := range f {
		out[r.State]++
	}
	return out
}

// goldenRig is the metrics over a simulated instrument whose cached state was read once, with fixed scans.
func goldenRig(t *testing.T) (*prometheus.Registry, *Metrics, *instrument.Controller) {
	t.Helper()
	in, err := sim.New(sim.Config{Seed: 1}, sim.NewManualClock(time.Unix(1_700_000_000, 0)))
	if err != nil {
		t.Fatal(err)
	}
	cfg := instrument.FromDescription("bench-1", "sim", in.Describe())
	ctl, err := instrument.NewController(in, cfg, slog.New(slog.NewTextHandler(io.Discard, nil)))
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithCancel(context.Background())
	done := make(chan struct{})
	go func() { ctl.Run(ctx); close(done) }()
	t.Cleanup(func() { cancel(); <-done })
	if err := ctl.Refresh(ctx); err != nil {
		t.Fatal(err)
	}
	if err := ctl.SetSource(ctx, 30, 0.8); err != nil {
		t.Fatal(err)
	}
	ctl.NoteRate(1234.5, 1398.25)
	reg := prometheus.NewPedanticRegistry()
	scans := fakeScans{{ID: "scan-000001", State: scan.Done}, {ID: "scan-000002", State: scan.Done},
		{ID: "scan-000003", State: scan.Running}, {ID: "scan-000004", State: scan.Queued}}
	m := New(reg, ctl, scans)
	m.now = func() time.Time { return time.Unix(1_700_000_100, 500_000_000) }
	m.KnowSafetyEvents("interlock_opened", "high_voltage_off_idle")
	return reg, m, ctl
}

// compareGolden compares the named metrics with testdata/name.prom (rewritten with -update).
func compareGolden(t *testing.T, g prometheus.Gatherer, name string, metrics ...string) {
	t.Helper()
	path := filepath.Join("testdata", name+".prom")
	if *update {
		if err := os.WriteFile(path, []byte(exposition(g, metrics)), 0o644); err != nil {
			t.Fatal(err)
		}
	}
	want, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	if err := testutil.GatherAndCompare(g, bytes.NewReader(want), metrics...); err != nil {
		t.Fatal(err)
	}
}

// exposition is the text exposition of the named metric families, as /metrics serves it.
func exposition(g prometheus.Gatherer, names []string) string {
	rec := httptest.NewRecorder()
	promhttp.HandlerFor(g, promhttp.HandlerOpts{}).ServeHTTP(rec, httptest.NewRequest("GET", "/metrics", nil))
	var out strings.Builder
	keep := false
	for _, line := range strings.SplitAfter(rec.Body.String(), "\n") {
		if name, ok := strings.CutPrefix(line, "# HELP "); ok {
			name, _, _ = strings.Cut(name, " ")
			keep = slices.Contains(names, name)
		}
		if keep {
			out.WriteString(line)
		}
	}
	return out.String()
}

// TestStateExposition: the cached instrument state and the scans' states, in base units (volts, amperes,
// degrees, seconds), against golden exposition text.
func TestStateExposition(t *testing.T) {
	reg, _, _ := goldenRig(t)
	compareGolden(t, reg, "state",
		"goniod_axis_position_degrees", "goniod_tube_voltage_volts", "goniod_tube_current_amperes",
		"goniod_high_voltage_on", "goniod_interlock_closed", "goniod_link_up", "goniod_link_errors_total",
		"goniod_link_timeouts_total", "goniod_link_reconnects_total", "goniod_count_rate_per_second",
		"goniod_count_rate_corrected_per_second", "goniod_queue_length", "goniod_scans", "goniod_instrument_info",
		"goniod_safety_events_total")
}

// TestPointAndStateObservations: a running scan's points move its progress, counts and the progress time;
// its progress disappears when it stops.
func TestPointAndStateObservations(t *testing.T) {
	reg, m, _ := goldenRig(t)
	rec := &scan.Record{ID: "scan-000003", State: scan.Running, PointsTotal: 8}
	m.StateChanged(rec)
	for i := range 3 {
		m.PointStored(rec, &goniodv1.Point{Index: uint32(i), Counts: 100 + uint64(i)}, time.Duration(i+1)*20*time.Microsecond)
	}
	m.SafetyEvent("interlock_opened")
	compareGolden(t, reg, "points", "goniod_points_persisted_total", "goniod_detector_counts_total",
		"goniod_point_overhead_seconds", "goniod_scan_progress_ratio", "goniod_scan_last_progress_timestamp_seconds",
		"goniod_scan_transitions_total", "goniod_safety_events_total")
	rec.State = scan.Paused
	m.StateChanged(rec)
	if n := testutil.CollectAndCount(m.progress); n != 0 {
		t.Errorf("%d progress series after the scan paused, want none", n)
	}
}

// TestExpositionLint: every metric follows the Prometheus naming conventions (client_golang's promlint, the
// same checks as promtool check metrics).
func TestExpositionLint(t *testing.T) {
	reg, m, _ := goldenRig(t)
	NewGRPC(reg)
	m.StateChanged(&scan.Record{ID: "scan-000003", State: scan.Running, PointsTotal: 8})
	m.PointStored(&scan.Record{ID: "scan-000003", State: scan.Running, PointsTotal: 8}, &goniodv1.Point{Counts: 5}, time.Millisecond)
	problems, err := testutil.GatherAndLint(reg)
	if err != nil {
		t.Fatal(err)
	}
	for _, p := range problems {
		t.Errorf("%s: %s", p.Metric, p.Text)
	}
}
