package main

import (
	"context"
	"encoding/csv"
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"goniod/client"
	"goniod/daemon/server/servertest"
)

// gonio align finds the simulator's zero offsets within 0.02° (the daemon's alignment target) and stores them.
func TestAlignCommand(t *testing.T) {
	d := servertest.Start(t, servertest.WithSim("seed", int64(8)),
		servertest.WithSim("theta_offset_deg", -0.21), servertest.WithSim("twotheta_offset_deg", 0.33))
	code, out, errs := run(t, d.Addr, "align", "--kv", "30", "--ma", "1", "--store", "--output", "json")
	if code != exitOK {
		t.Fatalf("align exit %d: %s", code, errs)
	}
	var got struct {
		Offsets []struct {
			Axis      string  `json:"axis"`
			OffsetDeg float64 `json:"offset_deg"`
			ErrDeg    float64 `json:"offset_err_deg"`
		} `json:"offsets"`
		Stored  bool     `json:"stored"`
		ScanIDs []string `json:"scan_ids"`
	}
	if err := json.Unmarshal([]byte(out), &got); err != nil {
		t.Fatalf("align --output json printed %q: %v", out, err)
	}
	want := map[string]float64{"theta": -0.21, "twotheta": 0.33}
	if !got.Stored || len(got.Offsets) != 2 || len(got.ScanIDs) != 4 {
		t.Fatalf("align result %+v", got)
	}
	for _, o := range got.Offsets {
		if math.Abs(o.OffsetDeg-want[o.Axis]) > 0.02 {
			t.Errorf("%s offset %.4f° ± %.4f°, configured %g°", o.Axis, o.OffsetDeg, o.ErrDeg, want[o.Axis])
		}
	}
	code, out, _ = run(t, d.Addr, "align", "--kv", "30", "--ma", "1")
	if code != exitOK || !strings.Contains(out, "reference reflection: Cu Kα1") || !strings.Contains(out, "not stored") {
		t.Errorf("align table exit %d:\n%s", code, out)
	}
	if code, _, errs = run(t, d.Addr, "align", "--kv", "30"); code != exitUsage {
		t.Errorf("--kv without --ma: exit %d (%s), want %d", code, errs, exitUsage)
	}
	if code, _, errs = run(t, d.Addr, "align", "--kv", "60", "--ma", "1"); code != exitUsage || !strings.Contains(errs, "source.kv") {
		t.Errorf("60 kV: exit %d (%s), want a refusal naming source.kv", code, errs)
	}
}

// gonio fetch SERIES-ID writes the series as one table with a scan_id column, or one file per scan.
func TestFetchSeries(t *testing.T) {
	d := servertest.Start(t)
	ctx := context.Background()
	s, err := d.Client.SubmitSeries(ctx, client.SeriesRequest{
		Scan:    client.ScanRequest{Kind: client.Coupled, From: 20, To: 21, Step: 0.1, Dwell: time.Second},
		Sources: []client.Source{{KV: 15, MA: 0.8}, {KV: 20, MA: 0.8}, {KV: 25, MA: 0.8}}})
	if err != nil {
		t.Fatal(err)
	}
	for _, id := range s.ScanIDs {
		if final, _ := d.WaitEnd(t, id); final.State != client.Done {
			t.Fatalf("scan %s ended %s: %s", id, final.State, final.Reason)
		}
	}
	file := filepath.Join(t.TempDir(), "series.csv")
	if code, _, errs := run(t, d.Addr, "fetch", s.ID, "-o", file); code != exitOK {
		t.Fatalf("fetch %s exit %d: %s", s.ID, code, errs)
	}
	f, err := os.Open(file)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	rows, err := csv.NewReader(f).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	if len(rows) != 1+3*11 || rows[0][0] != "scan_id" || rows[0][1] != "index" {
		t.Fatalf("%d rows, header %v; want 34 rows starting scan_id,index", len(rows), rows[0])
	}
	kvCol := -1
	for i, c := range rows[0] {
		if c == "tube_kv" {
			kvCol = i
		}
	}
	for i, r := range rows[1:] {
		scanNo := i / 11
		if r[0] != s.ScanIDs[scanNo] || r[kvCol] != []string{"15", "20", "25"}[scanNo] {
			t.Fatalf("row %d: scan %s at %s kV, want %s at the series' setting", i+1, r[0], r[kvCol], s.ScanIDs[scanNo])
		}
	}
	dir := filepath.Join(t.TempDir(), "split")
	if code, _, errs := run(t, d.Addr, "fetch", s.ID, "--split", dir, "--format", "json"); code != exitOK {
		t.Fatalf("fetch --split exit %d: %s", code, errs)
	}
	for _, id := range s.ScanIDs {
		b, err := os.ReadFile(filepath.Join(dir, id+".json"))
		if err != nil {
			t.Fatal(err)
		}
		if n := strings.Count(string(b), "\n"); n != 11 {
			t.Errorf("%s.json has %d lines, want 11 points", id, n)
		}
	}
	if code, _, _ := run(t, d.Addr, "fetch", s.ScanIDs[0], "--split", dir); code != exitUsage {
		t.Errorf("--split with a scan ID: exit %d, want %d", code, exitUsage)
	}
}
