package main

import (
	"os"
	"path/filepath"
	"reflect"
	"strings"
	"testing"
	"time"

	"goniod/client"
	"goniod/daemon/server/servertest"
)

func TestParsePlan(t *testing.T) {
	data, err := os.ReadFile(filepath.Join("testdata", "plan-lif-batch7.yaml"))
	if err != nil {
		t.Fatal(err)
	}
	p, err := parsePlan("plan-lif-batch7.yaml", data)
	if err != nil {
		t.Fatal(err)
	}
	if p.name != "LiF batch 7 qualification" || len(p.entries) != 4 {
		t.Fatalf("name %q, %d entries", p.name, len(p.entries))
	}
	tube := &client.Source{KV: 30, MA: 0.8}
	want := []planEntry{
		{line: 7, scan: client.ScanRequest{Kind: client.Coupled, From: 10, To: 55, Step: 0.1, Dwell: time.Second, Source: tube, Label: "LiF batch 7"}},
		{line: 8, scan: client.ScanRequest{Kind: client.Coupled, From: 4, To: 30, Step: 0.1, Dwell: time.Second, Label: "LiF batch 7"},
			series: []client.Source{{KV: 12, MA: 0.8}, {KV: 15, MA: 0.8}, {KV: 20, MA: 0.8}, {KV: 25, MA: 0.8}, {KV: 30, MA: 0.8}}},
		{line: 10, scan: client.ScanRequest{Kind: client.Axis, Axis: "theta", From: 21.5, To: 23.5, Step: 0.01, Dwell: 2 * time.Second, Source: tube, Label: "LiF batch 7"}},
		{line: 12, scan: client.ScanRequest{Kind: client.Timed, Points: 60, At: map[string]float64{"theta": 22.5, "twotheta": 45},
			Dwell: 10 * time.Second, Source: tube, Label: "LiF batch 7", Note: "warm-up drift"}},
	}
	for i, w := range want {
		got := p.entries[i]
		if got.line != w.line || !reflect.DeepEqual(got.scan, w.scan) || !reflect.DeepEqual(got.series, w.series) {
			t.Errorf("entry %d:\n got  line %d %+v series %v\n want line %d %+v series %v", i, got.line, got.scan, got.series, w.line, w.scan, w.series)
		}
	}
}

// TestPlanMistakes: each mistake is reported with its line and key path.
func TestPlanMistakes(t *testing.T) {
	for _, c := range []struct{ name, plan, want string }{
		{"empty", "", "p.yaml:1: scans: missing"},
		{"not a mapping", "- a\n- b\n", "p.yaml:1: want a mapping"},
		{"syntax", "scans: [\n", "p.yaml:"},
		{"no kind", "scans:\n  - dwell: 1s\n", "p.yaml:2: scans[0]: needs one of coupled, axis, timed or list"},
		{"two kinds", "scans:\n  - timed: {points: 3}\n    list: [{theta: 1}]\n", "p.yaml:2: scans[0]: has 2 scan kinds"},
		{"unknown key", "scans:\n  - coupled: {from: 1, to: 2, step: 0.1, stepp: 1}\n", "p.yaml:2: scans[0].coupled.stepp: unknown key (known: from, lead, step, to)"},
		{"twice", "dwell: 1s\ndwell: 2s\nscans: [{timed: {points: 1}}]\n", "p.yaml:2: dwell: given twice"},
		{"bad number", "scans:\n  - coupled: {from: ten, to: 2, step: 0.1}\n", `p.yaml:2: scans[0].coupled.from: "ten" is not a number`},
		{"precision", "precision: 2\nscans: [{timed: {points: 1}}]\n", "p.yaml:1: precision: 2 must be between 0 and 1"},
		{"tube and series", "scans:\n  - coupled: {from: 1, to: 2, step: 0.1}\n    tube: {kv: 30, ma: 0.8}\n    series: {kv: [20, 30], ma: 0.8}\n",
			"p.yaml:3: scans[0].tube: a scan with a series takes its tube settings from the series"},
		{"series without list", "scans:\n  - coupled: {from: 1, to: 2, step: 0.1}\n    series: {kv: 20}\n", "p.yaml:3: scans[0].series: needs kv and ma"},
		{"empty position", "scans:\n  - list: [{}]\n", "p.yaml:2: scans[0].list[0]: want axis angles"},
		{"keep_hv", "keep_hv: maybe\nscans: [{timed: {points: 1}}]\n", `p.yaml:1: keep_hv: "maybe": want true or false`},
	} {
		t.Run(c.name, func(t *testing.T) {
			_, err := parsePlan("p.yaml", []byte(c.plan))
			if err == nil || !strings.Contains(err.Error(), c.want) {
				t.Errorf("error %v, want one containing %q", err, c.want)
			}
		})
	}
}

// TestPlanSeriesShapes: a series takes one list and one value, or two lists of the same length.
func TestPlanSeriesShapes(t *testing.T) {
	for _, c := range []struct {
		series string
		want   []client.Source
	}{
		{"{kv: [12, 20], ma: 0.8}", []client.Source{{KV: 12, MA: 0.8}, {KV: 20, MA: 0.8}}},
		{"{kv: 30, ma: [0.2, 0.4]}", []client.Source{{KV: 30, MA: 0.2}, {KV: 30, MA: 0.4}}},
		{"{kv: [20, 30], ma: [0.5, 0.4]}", []client.Source{{KV: 20, MA: 0.5}, {KV: 30, MA: 0.4}}},
	} {
		p, err := parsePlan("p.yaml", []byte("scans:\n  - coupled: {from: 1, to: 2, step: 0.1}\n    series: "+c.series+"\n"))
		if err != nil {
			t.Fatalf("%s: %v", c.series, err)
		}
		if got := p.entries[0].series; !reflect.DeepEqual(got, c.want) {
			t.Errorf("%s: %v, want %v", c.series, got, c.want)
		}
	}
}

// TestFieldLine: the daemon's field names find their line in the plan.
func TestFieldLine(t *testing.T) {
	plan := "scans:\n  - coupled:\n      from: 1\n      to: 2\n      step: 0.1\n    dwell: 1s\n    tube: {kv: 30, ma: 0.8}\n"
	p, err := parsePlan("p.yaml", []byte(plan))
	if err != nil {
		t.Fatal(err)
	}
	e := p.entries[0]
	for field, line := range map[string]int{"coupled.step_deg": 5, "coupled.to_deg": 4, "counting.dwell": 6, "source.kv": 7,
		"coupled.lead_axis": 2, "label": 2} {
		if got := e.fieldLine(field); got != line {
			t.Errorf("fieldLine(%q) = %d, want %d", field, got, line)
		}
	}
}

// TestRunPlan: a plan runs whole on the simulator; a plan over the tube's rating submits nothing.
func TestRunPlan(t *testing.T) {
	d := servertest.Start(t)
	code, out, errs := run(t, d.Addr, "run", filepath.Join("testdata", "plan-small.yaml"))
	if code != exitOK {
		t.Fatalf("run: exit %d: %s", code, errs)
	}
	if ids := strings.Fields(out); !reflect.DeepEqual(ids, []string{"scan-000001", "scan-000002", "scan-000003"}) {
		t.Errorf("run printed %q, want the three scan IDs", out)
	}
	for _, id := range []string{"scan-000001", "scan-000002", "scan-000003"} {
		s, err := d.Client.Scan(t.Context(), id)
		if err != nil || s.State != client.Done || s.Request.Label != "LiF batch 7" {
			t.Errorf("%s: %+v, %v; want done with the plan's label", id, s, err)
		}
	}
	s, _ := d.Client.Scan(t.Context(), "scan-000003")
	if s.SeriesID == "" || s.Request.Source == nil || s.Request.Source.KV != 30 {
		t.Errorf("scan-000003: series %q, source %+v; want the 30 kV scan of a series", s.SeriesID, s.Request.Source)
	}
	code, _, errs = run(t, d.Addr, "run", filepath.Join("testdata", "plan-over-rating.yaml"), "--detach")
	if code != exitUsage || !strings.Contains(errs, "plan-over-rating.yaml:4: source.kv: 300 kV is above the tube's rating") {
		t.Errorf("over-rating plan: exit %d, stderr %q", code, errs)
	}
	scans, _, err := d.Client.List(t.Context(), client.ListOptions{})
	if err != nil || len(scans) != 3 {
		t.Errorf("after a refused plan the daemon has %d scans (%v), want the 3 of the first plan", len(scans), err)
	}
}

// FuzzParsePlan: no input crashes the plan reader; a plan it accepts has at least one scan of a known kind.
func FuzzParsePlan(f *testing.F) {
	for _, name := range []string{"plan-lif-batch7.yaml", "plan-mistakes.yaml", "plan-small.yaml"} {
		data, err := os.ReadFile(filepath.Join("testdata", name))
		if err != nil {
			f.Fatal(err)
		}
		f.Add(data)
	}
	f.Fuzz(func(t *testing.T, data []byte) {
		p, err := parsePlan("fuzz.yaml", data)
		if err != nil {
			return
		}
		if len(p.entries) == 0 {
			t.Fatal("accepted a plan without scans")
		}
		for _, e := range p.entries {
			switch e.scan.Kind {
			case client.Coupled, client.Axis, client.Timed, client.List:
			default:
				t.Fatalf("accepted a scan of kind %q", e.scan.Kind)
			}
		}
	})
}
