package metrics_test

import (
	"bytes"
	"context"
	"encoding/json"
	"fmt"
	"io"
	"net"
	"net/http"
	"net/url"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
	"time"

	"goniod/client"
	"goniod/daemon/server/servertest"
)

// startScan starts a long coupled scan with high voltage on and waits for its first points.
func startScan(t *testing.T, d *servertest.Daemon) client.Scan {
	t.Helper()
	ctx := context.Background()
	s, err := d.Client.Submit(ctx, client.ScanRequest{Kind: client.Coupled, From: 10, To: 50, Step: 0.05, Dwell: time.Second,
		Source: &client.Source{KV: 30, MA: 0.8}, Label: "LiF batch B"})
	if err != nil {
		t.Fatal(err)
	}
	deadline := time.Now().Add(20 * time.Second)
	for {
		got, err := d.Client.Scan(ctx, s.ID)
		if err != nil {
			t.Fatal(err)
		}
		if got.PointsDone >= 3 {
			return got
		}
		if time.Now().After(deadline) {
			t.Fatalf("scan %s has %d points after 20 s (%s %s)", s.ID, got.PointsDone, got.State, got.Reason)
		}
		time.Sleep(20 * time.Millisecond)
	}
}

func scrape(t *testing.T, addr string) []byte {
	t.Helper()
	resp, err := http.Get("http://" + addr + "/metrics")
	if err != nil {
		t.Fatal(err)
	}
	defer resp.Body.Close()
	b, err := io.ReadAll(resp.Body)
	if err != nil || resp.StatusCode != http.StatusOK {
		t.Fatalf("GET /metrics: %v %s", err, resp.Status)
	}
	return b
}

// TestExpositionOfARunningDaemon scrapes a daemon during a scan: promtool check metrics finds nothing to
// complain about, and every metric the monitoring relies on is there.
func TestExpositionOfARunningDaemon(t *testing.T) {
	promtool := servertest.NeedProgram(t, "promtool", "prometheus")
	d := servertest.Start(t, servertest.WithSim("speed", 20.0))
	startScan(t, d)
	if _, err := d.Client.State(context.Background()); err != nil { // a gRPC call for the gRPC metrics
		t.Fatal(err)
	}
	text := scrape(t, d.MetricsAddr)
	cmd := exec.Command(promtool, "check", "metrics")
	cmd.Stdin = bytes.NewReader(text)
	if out, err := cmd.CombinedOutput(); err != nil {
		t.Errorf("promtool check metrics: %v\n%s", err, out)
	}
	for _, name := range []string{
		"goniod_count_rate_per_second", "goniod_count_rate_corrected_per_second", "goniod_detector_counts_total",
		`goniod_axis_position_degrees{axis="theta"}`, `goniod_axis_position_degrees{axis="twotheta"}`,
		"goniod_tube_voltage_volts 30000", "goniod_tube_current_amperes 0.0008", "goniod_high_voltage_on 1",
		"goniod_interlock_closed 1", "goniod_link_up 1", "goniod_link_errors_total", "goniod_link_timeouts_total",
		"goniod_link_reconnects_total", `goniod_scans{state="running"} 1`, "goniod_scan_progress_ratio{scan=",
		"goniod_scan_last_progress_timestamp_seconds", "goniod_queue_length 0", "goniod_points_persisted_total",
		"goniod_point_overhead_seconds_bucket", `goniod_safety_events_total{event="interlock_opened"} 0`,
		`goniod_grpc_server_handled_total{code="OK",method="GetState",service="goniod.v1.Instrument",type="unary"}`,
		"goniod_grpc_server_handling_seconds_bucket", "goniod_instrument_info{",
	} {
		if !bytes.Contains(text, []byte("\n"+name)) {
			t.Errorf("/metrics lacks %s", name)
		}
	}
}

// promQuery runs an instant query against Prometheus' HTTP API at time at and returns the samples' values.
func promQuery(base, query string, at time.Time) ([]float64, error) {
	resp, err := http.Get(base + "/api/v1/query?query=" + url.QueryEscape(query) + "&time=" + strconv.FormatFloat(float64(at.UnixMilli())/1e3, 'f', 3, 64))
	if err != nil {
		return nil, err
	}
	defer resp.Body.Close()
	var body struct {
		Status string `json:"status"`
		Data   struct {
			Result []struct {
				Value [2]any `json:"value"`
			} `json:"result"`
		} `json:"data"`
		Error string `json:"error"`
	}
	if err := json.NewDecoder(resp.Body).Decode(&body); err != nil {
		return nil, err
	}
	if body.Status != "success" {
		return nil, fmt.Errorf("query %s: %s", query, body.Error)
	}
	var out []float64
	for _, r := range body.Data.Result {
		s, _ := r.Value[1].(string)
		v, err := strconv.ParseFloat(s, 64)
		if err != nil {
			return nil, err
		}
		out = append(out, v)
	}
	return out, nil
}

// TestRealPrometheusScrapesTheCountRate starts Debian's Prometheus on loopback with the deploy alerting rules,
// lets it scrape a daemon running a simulated scan, and reads the count rate back through the query API: it
// must be the rate of the point stored last before the scrape.
func TestRealPrometheusScrapesTheCountRate(t *testing.T) {
	prom := servertest.NeedProgram(t, "prometheus", "prometheus")
	d := servertest.Start(t, servertest.WithSim("speed", 20.0), servertest.WithSim("seed", int64(8)))
	s := startScan(t, d)
	dir := t.TempDir()
	rules, err := filepath.Abs(filepath.Join("..", "..", "cmd", "goniod", "deploy", "goniod-alerts.yml"))
	if err != nil {
		t.Fatal(err)
	}
	cfg := fmt.Sprintf("global:\n  scrape_interval: 1s\n  evaluation_interval: 1s\nrule_files:\n  - %s\n"+
		"scrape_configs:\n  - job_name: goniod\n    static_configs:\n      - targets: [%q]\n", rules, d.MetricsAddr)
	if err := os.WriteFile(filepath.Join(dir, "prometheus.yml"), []byte(cfg), 0o600); err != nil {
		t.Fatal(err)
	}
	l, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	webAddr := l.Addr().String()
	l.Close()
	var log bytes.Buffer
	cmd := exec.Command(prom, "--config.file="+filepath.Join(dir, "prometheus.yml"), "--storage.tsdb.path="+filepath.Join(dir, "tsdb"),
		"--web.listen-address="+webAddr)
	cmd.Stdout, cmd.Stderr = &log, &log
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { _ = cmd.Process.Kill(); _ = cmd.Wait() })
	base := "http://" + webAddr
	var rates, persisted []float64
	var at time.Time
	deadline := time.Now().Add(30 * time.Second)
	for {
		at = time.Now()
		rates, err = promQuery(base, `goniod_count_rate_per_second{job="goniod"}`, at)
		if err == nil && len(rates) == 1 && rates[0] > 0 {
			// the same scrape's count of stored points: the rate is that of its last point (or of the point
			// stored while the scrape ran)
			if persisted, err = promQuery(base, `goniod_points_persisted_total{job="goniod"}`, at); err == nil && len(persisted) == 1 {
				break
			}
		}
		if time.Now().After(deadline) {
			t.Fatalf("no count rate in Prometheus after 30 s (last: %v, %v); its log:\n%s", rates, err, log.String())
		}
		time.Sleep(250 * time.Millisecond)
	}
	for q, want := range map[string]float64{`up{job="goniod"}`: 1, `goniod_scans{state="running"}`: 1, `goniod_high_voltage_on`: 1} {
		got, err := promQuery(base, q, time.Now())
		if err != nil || len(got) != 1 || got[0] != want {
			t.Errorf("%s = %v (%v), want %g", q, got, err, want)
		}
	}
	if _, err := d.Client.Cancel(context.Background(), s.ID); err != nil {
		t.Fatal(err)
	}
	_, points := d.WaitEnd(t, s.ID)
	n := int(persisted[0])
	if n < 1 || n >= len(points) || (points[n-1].Rate != rates[0] && points[n].Rate != rates[0]) {
		t.Fatalf("Prometheus has a count rate of %g after %d points; the stored points %d and %d have other rates",
			rates[0], n, n-1, n)
	}
	t.Logf("Prometheus: goniod_count_rate_per_second = %g counts/s after %d stored points (point %d: %g, point %d: %g)",
		rates[0], n, n-1, points[n-1].Rate, n, points[n].Rate)
	resp, err := http.Get(base + "/api/v1/rules")
	if err != nil {
		t.Fatal(err)
	}
	defer resp.Body.Close()
	b, _ := io.ReadAll(resp.Body)
	for _, alert := range []string{"GoniodHighVoltageWithInterlockOpen", "GoniodDeadTimeLossHigh", "GoniodScanStalled", "GoniodLinkDown"} {
		if !strings.Contains(string(b), `"name":"`+alert+`"`) {
			t.Errorf("Prometheus did not load the alert %s from the deploy rules", alert)
		}
	}
	if strings.Contains(string(b), `"health":"err"`) {
		t.Errorf("a rule fails to evaluate: %s", b)
	}
}
