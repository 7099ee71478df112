package scan

import (
	"math"
	"testing"
	"time"

	"goniod/daemon/instrument"
	"goniod/daemon/validate"
)

func testConfig() *instrument.Config {
	return &instrument.Config{
		Axes: []instrument.Axis{
			{Name: "theta", MinDeg: -10, MaxDeg: 100, ResolutionDeg: 0.001, Coupling: 1},
			{Name: "twotheta", MinDeg: -10, MaxDeg: 170, ResolutionDeg: 0.001, Coupling: 2},
			{Name: "chi", MinDeg: -90, MaxDeg: 90, ResolutionDeg: 0.01},
		},
		Tube:      instrument.Tube{Anode: "Cu", MaxKV: 35, MaxMA: 1, MaxPowerW: 30},
		MaxPoints: 10000,
		MaxDwell:  time.Hour,
	}
}

func TestPlanPositions(t *testing.T) {
	cases := []struct {
		name       string
		req        Request
		n          int
		axes       []string
		first, end []Target
	}{
		{"coupled up, end on a step", Request{Kind: Coupled, FromDeg: 10, ToDeg: 30, StepDeg: 0.1}, 201,
			[]string{"theta", "twotheta"}, []Target{{"theta", 10}, {"twotheta", 20}}, []Target{{"theta", 30}, {"twotheta", 60}}},
		{"coupled down", Request{Kind: Coupled, FromDeg: 30, ToDeg: 10, StepDeg: 0.5}, 41,
			[]string{"theta", "twotheta"}, []Target{{"theta", 30}, {"twotheta", 60}}, []Target{{"theta", 10}, {"twotheta", 20}}},
		{"coupled led by twotheta", Request{Kind: Coupled, Axis: "twotheta", FromDeg: 20, ToDeg: 60, StepDeg: 0.2}, 201,
			[]string{"theta", "twotheta"}, []Target{{"theta", 10}, {"twotheta", 20}}, []Target{{"theta", 30}, {"twotheta", 60}}},
		{"end within half a step is included", Request{Kind: AxisOnly, Axis: "theta", FromDeg: 0, ToDeg: 1.04, StepDeg: 0.1}, 11,
			[]string{"theta"}, []Target{{"theta", 0}}, []Target{{"theta", 1}}},
		{"end beyond half a step rounds up", Request{Kind: AxisOnly, Axis: "theta", FromDeg: 0, ToDeg: 1.06, StepDeg: 0.1}, 12,
			[]string{"theta"}, []Target{{"theta", 0}}, []Target{{"theta", 1.1}}},
		{"single point range", Request{Kind: AxisOnly, Axis: "chi", FromDeg: 5, ToDeg: 5, StepDeg: 0.1}, 1,
			[]string{"chi"}, []Target{{"chi", 5}}, []Target{{"chi", 5}}},
		{"timed at a position", Request{Kind: Timed, Points: 7, At: map[string]float64{"theta": 22.5, "twotheta": 45}}, 7,
			[]string{"theta", "twotheta"}, []Target{{"theta", 22.5}, {"twotheta", 45}}, []Target{{"theta", 22.5}, {"twotheta", 45}}},
		{"list", Request{Kind: List, Positions: []map[string]float64{{"theta": 1}, {"theta": 2, "twotheta": 4}}}, 2,
			[]string{"theta", "twotheta"}, []Target{{"theta", 1}}, []Target{{"theta", 2}, {"twotheta", 4}}},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			tc.req.Dwell = time.Second
			p, err := NewPlan(tc.req, testConfig())
			if err != nil {
				t.Fatal(err)
			}
			if p.Len() != tc.n {
				t.Fatalf("%d points, want %d", p.Len(), tc.n)
			}
			if got := p.Axes(); !equalStrings(got, tc.axes) {
				t.Errorf("axes %v, want %v", got, tc.axes)
			}
			if got := p.Targets(0); !equalTargets(got, tc.first) {
				t.Errorf("first point %v, want %v", got, tc.first)
			}
			if got := p.Targets(p.Len() - 1); !equalTargets(got, tc.end) {
				t.Errorf("last point %v, want %v", got, tc.end)
			}
		})
	}
}

// Positions are computed as start + i·step, never accumulated: after many steps there is no drift.
func TestPlanNoAccumulatedDrift(t *testing.T) {
	cfg := testConfig()
	cfg.MaxPoints = 1_000_000
	p, err := NewPlan(Request{Kind: AxisOnly, Axis: "theta", FromDeg: 0, ToDeg: 90, StepDeg: 0.001, Dwell: time.Second}, cfg)
	if err != nil {
		t.Fatal(err)
	}
	if p.Len() != 90001 {
		t.Fatalf("%d points, want 90001", p.Len())
	}
	for _, i := range []int{1, 333, 12345, 45000, 90000} {
		want := float64(i) / 1000
		if got := p.Targets(i)[0].Deg; math.Abs(got-want) > 1e-9 {
			t.Errorf("point %d at %.12f°, want %.12f°", i, got, want)
		}
	}
}

func TestPlanRefusals(t *testing.T) {
	base := Request{Kind: Coupled, FromDeg: 10, ToDeg: 30, StepDeg: 0.1, Dwell: time.Second}
	cases := []struct {
		name  string
		edit  func(*Request)
		field string
	}{
		{"step zero", func(r *Request) { r.StepDeg = 0 }, "coupled.step_deg"},
		{"step NaN", func(r *Request) { r.StepDeg = math.NaN() }, "coupled.step_deg"},
		{"end -Inf", func(r *Request) { r.ToDeg = math.Inf(-1) }, "coupled.to_deg"},
		{"twotheta beyond its limit", func(r *Request) { r.ToDeg = 90 }, "coupled.to_deg"},
		{"step finer than the resolution", func(r *Request) { r.StepDeg = 0.0004 }, "coupled.step_deg"},
		{"more points than allowed", func(r *Request) { r.StepDeg = 0.001 }, "coupled.step_deg"},
		{"dwell zero", func(r *Request) { r.Dwell = 0 }, "counting.dwell"},
		{"dwell beyond max", func(r *Request) { r.Dwell = 2 * time.Hour }, "counting.dwell"},
		{"uncoupled lead", func(r *Request) { r.Axis = "chi" }, "coupled.lead_axis"},
		{"source power", func(r *Request) { r.Source = &Source{KV: 35, MA: 1} }, "source"},
		{"settle negative", func(r *Request) { r.Settle = -time.Second }, "settle"},
		{"bad kind", func(r *Request) { r.Kind = "spiral" }, "kind"},
		{"min dwell above dwell", func(r *Request) { r.RelativeError, r.MinDwell = 0.01, 2*time.Second }, "counting.min_dwell"},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			r := base
			tc.edit(&r)
			_, err := NewPlan(r, testConfig())
			fields := validate.Fields(err)
			if len(fields) == 0 {
				t.Fatalf("accepted; want a refusal naming %s", tc.field)
			}
			for _, f := range fields {
				if f.Field == tc.field {
					return
				}
			}
			t.Errorf("refusal %v does not name %s", err, tc.field)
		})
	}
}

func TestSeriesExpand(t *testing.T) {
	s := SeriesRequest{Scan: Request{Kind: Coupled, FromDeg: 10, ToDeg: 20, StepDeg: 0.1, Dwell: time.Second},
		Sources: []Source{{12, 0.8}, {20, 0.8}, {30, 0.8}}, Settle: 5 * time.Second}
	got := s.Expand()
	if len(got) != 3 {
		t.Fatalf("%d scans, want 3", len(got))
	}
	for i, r := range got {
		if r.Source == nil || r.Source.KV != s.Sources[i].KV || r.Settle != 5*time.Second {
			t.Errorf("scan %d: source %+v settle %v", i, r.Source, r.Settle)
		}
		wantKeep := i < 2
		if r.KeepHighVoltage != wantKeep {
			t.Errorf("scan %d keeps high voltage %v, want %v (off only after the last)", i, r.KeepHighVoltage, wantKeep)
		}
	}
}

func equalStrings(a, b []string) bool {
	if len(a) != len(b) {
		return false
	}
	for i := range a {
		if a[i] != b[i] {
			return false
		}
	}
	return true
}

func equalTargets(a, b []Target) bool {
	if len(a) != len(b) {
		return false
	}
	for i := range a {
		if a[i].Axis != b[i].Axis || math.Abs(a[i].Deg-b[i].Deg) > 1e-9 {
			return false
		}
	}
	return true
}
