package scan

import (
	"math"
	"strings"
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

// Every point of a stepped scan lies at start + i·step as decimal arithmetic gives it: the expectation is
// computed in integer micro-degrees, independently of the planner's floating point.
func TestPlanExactDecimalPositions(t *testing.T) {
	cases := []struct {
		name            string
		req             Request
		fromU, stepU, n int64 // lead axis, micro-degrees
		lead            string
		ratios          map[string]int64 // numerator over the lead's 1 (coupled) or 2 (led by twotheta)
		leadDiv         int64
	}{
		{"coupled in θ up", Request{Kind: Coupled, FromDeg: 10, ToDeg: 55, StepDeg: 0.1}, 10_000_000, 100_000, 451, "theta",
			map[string]int64{"theta": 1, "twotheta": 2}, 1},
		{"coupled in θ down, 0.03°", Request{Kind: Coupled, FromDeg: 40.2, ToDeg: 10.2, StepDeg: 0.03}, 40_200_000, -30_000, 1001, "theta",
			map[string]int64{"theta": 1, "twotheta": 2}, 1},
		{"coupled in 2θ", Request{Kind: Coupled, Axis: "twotheta", FromDeg: 20, ToDeg: 110, StepDeg: 0.05}, 20_000_000, 50_000, 1801, "twotheta",
			map[string]int64{"theta": 1, "twotheta": 2}, 2},
		{"rocking curve", Request{Kind: AxisOnly, Axis: "theta", FromDeg: 21.5, ToDeg: 23.5, StepDeg: 0.002}, 21_500_000, 2_000, 1001, "theta",
			map[string]int64{"theta": 1}, 1},
		{"detector through zero", Request{Kind: AxisOnly, Axis: "twotheta", FromDeg: -1.5, ToDeg: 1.5, StepDeg: 0.02}, -1_500_000, 20_000, 151, "twotheta",
			map[string]int64{"twotheta": 1}, 1},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			tc.req.Dwell = time.Second
			p, err := NewPlan(tc.req, testConfig())
			if err != nil {
				t.Fatal(err)
			}
			if int64(p.Len()) != tc.n {
				t.Fatalf("%d points, want %d", p.Len(), tc.n)
			}
			for i := int64(0); i < tc.n; i++ {
				leadU := tc.fromU + i*tc.stepU
				for _, tg := range p.Targets(int(i)) {
					want := float64(leadU*tc.ratios[tg.Axis]/tc.leadDiv) / 1e6
					if tg.Deg != want {
						t.Fatalf("point %d: %s at %.12g°, want exactly %.12g°", i, tg.Axis, tg.Deg, want)
					}
				}
			}
		})
	}
}

// The end is included when it lies within half a step of a point; the number of points follows
// floor(span/step + 1/2) + 1 at both sides of the half-step boundary and for spans that are not exact in binary.
func TestPlanEndWithinHalfAStep(t *testing.T) {
	cases := []struct {
		from, to, step float64
		n              int
		last           float64
	}{
		{0, 0.3, 0.1, 4, 0.3},      // 0.3/0.1 = 2.9999999999999996 in binary
		{0, 0.7, 0.1, 8, 0.7},      // 6.999999999999999
		{10, 10.049, 0.1, 1, 10},   // end below half a step: not reached
		{10, 10.051, 0.1, 2, 10.1}, // end beyond half a step: the next point
		{5, 4.951, 0.1, 1, 5},      // downwards, within half a step
		{5, 4.949, 0.1, 2, 4.9},    // downwards, beyond half a step
		{5, 4.9, 0.1, 2, 4.9},
		{1, 2, 1, 2, 2},
	}
	for _, tc := range cases {
		p, err := NewPlan(Request{Kind: AxisOnly, Axis: "theta", FromDeg: tc.from, ToDeg: tc.to, StepDeg: tc.step, Dwell: time.Second}, testConfig())
		if err != nil {
			t.Fatalf("%g→%g by %g: %v", tc.from, tc.to, tc.step, err)
		}
		if p.Len() != tc.n || p.Targets(p.Len() - 1)[0].Deg != tc.last {
			t.Errorf("%g→%g by %g: %d points ending at %g°, want %d ending at %g°", tc.from, tc.to, tc.step, p.Len(), p.Targets(p.Len() - 1)[0].Deg, tc.n, tc.last)
		}
	}
}

// Timed and list scans, series and counting options are refused with the field and the allowed range named.
func TestPlanRefusalsOfOtherKinds(t *testing.T) {
	dwell := time.Second
	cases := []struct {
		name, field, says string
		req               Request
	}{
		{"timed without points", "timed.points", "[1, 10000]", Request{Kind: Timed, Dwell: dwell}},
		{"timed with too many points", "timed.points", "[1, 10000]", Request{Kind: Timed, Points: 10001, Dwell: dwell}},
		{"timed at an unknown axis", "timed.at_deg", "axes are", Request{Kind: Timed, Points: 3, Dwell: dwell, At: map[string]float64{"omega": 1}}},
		{"timed beyond a limit", "timed.at_deg.twotheta", "[-10, 170]", Request{Kind: Timed, Points: 3, Dwell: dwell, At: map[string]float64{"twotheta": 171}}},
		{"timed at NaN", "timed.at_deg.theta", "finite", Request{Kind: Timed, Points: 3, Dwell: dwell, At: map[string]float64{"theta": math.NaN()}}},
		{"empty list", "list.positions", "[1, 10000]", Request{Kind: List, Dwell: dwell}},
		{"empty list position", "list.positions[1]", "empty", Request{Kind: List, Dwell: dwell, Positions: []map[string]float64{{"theta": 1}, {}}}},
		{"list at an unknown axis", "list.positions[0]", "unknown axis", Request{Kind: List, Dwell: dwell, Positions: []map[string]float64{{"phi": 1}}}},
		{"list at +Inf", "list.positions[0].chi", "finite", Request{Kind: List, Dwell: dwell, Positions: []map[string]float64{{"chi": math.Inf(1)}}}},
		{"axis scan without an axis", "axis.axis", "axes are", Request{Kind: AxisOnly, FromDeg: 1, ToDeg: 2, StepDeg: 0.1, Dwell: dwell}},
		{"axis step finer than its resolution", "axis.step_deg", "resolution of 0.01", Request{Kind: AxisOnly, Axis: "chi", FromDeg: 1, ToDeg: 2, StepDeg: 0.005, Dwell: dwell}},
		{"tube power beyond the rating", "source", "30 W", Request{Kind: Timed, Points: 1, Dwell: dwell, Source: &Source{KV: 35, MA: 0.9}}},
		{"tube voltage beyond the rating", "source.kv", "[0, 35] kV", Request{Kind: Timed, Points: 1, Dwell: dwell, Source: &Source{KV: 40, MA: 0.1}}},
		{"tube current NaN", "source.ma", "finite", Request{Kind: Timed, Points: 1, Dwell: dwell, Source: &Source{KV: 20, MA: math.NaN()}}},
		{"precision NaN", "counting.relative_error", "finite", Request{Kind: Timed, Points: 1, Dwell: dwell, RelativeError: math.NaN()}},
		{"precision too fine", "counting.relative_error", "[0.0001, 0.5]", Request{Kind: Timed, Points: 1, Dwell: dwell, RelativeError: 1e-5}},
		{"slice below the shortest", "counting.min_dwell", "10ms", Request{Kind: Timed, Points: 1, Dwell: dwell, RelativeError: 0.01, MinDwell: time.Millisecond}},
		{"slice without precision", "counting.min_dwell", "relative_error", Request{Kind: Timed, Points: 1, Dwell: dwell, MinDwell: 100 * time.Millisecond}},
		{"settle beyond an hour", "settle", "[0s, 1h]", Request{Kind: Timed, Points: 1, Dwell: dwell, Settle: 2 * time.Hour}},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			_, err := NewPlan(tc.req, testConfig())
			checkRefusal(t, err, tc.field, tc.says)
		})
	}
	series := []struct {
		name, field, says string
		sr                SeriesRequest
	}{
		{"empty series", "series.sources", "at least one", SeriesRequest{}},
		{"series voltage beyond the rating", "series.sources[1].kv", "[0, 35] kV", SeriesRequest{Sources: []Source{{12, 0.5}, {50, 0.5}}}},
		{"series power beyond the rating", "series.sources[2]", "30 W", SeriesRequest{Sources: []Source{{12, 1}, {20, 1}, {35, 1}}}},
		{"series settle negative", "series.settle", "[0s, 1h]", SeriesRequest{Sources: []Source{{12, 1}}, Settle: -time.Second}},
		{"series too long", "series.sources", "maximum of 100", SeriesRequest{Sources: make([]Source, 101)}},
	}
	for _, tc := range series {
		t.Run(tc.name, func(t *testing.T) {
			checkRefusal(t, tc.sr.Validate(testConfig()), tc.field, tc.says)
		})
	}
}

func checkRefusal(t *testing.T, err error, field, says string) {
	t.Helper()
	for _, f := range validate.Fields(err) {
		if f.Field == field {
			if !strings.Contains(f.Reason, says) {
				t.Errorf("%s: %q does not say %q", field, f.Reason, says)
			}
			return
		}
	}
	t.Errorf("refusal %v does not name %s", err, field)
}

// FuzzNewPlan: any request is planned or refused with field errors, never a crash; a plan has between 1 and
// the maximum of points, and every target is finite and within its axis' limits.
func FuzzNewPlan(f *testing.F) {
	f.Add(uint8(0), uint8(0), 10.0, 30.0, 0.1, 0, int64(time.Second), 0.0, 0.0, 0.0)
	f.Add(uint8(1), uint8(2), -90.0, 90.0, 0.01, 0, int64(time.Second), 0.05, 30.0, 0.8)
	f.Add(uint8(2), uint8(1), 22.5, 0.0, 0.0, 7, int64(time.Millisecond), 0.0, 35.0, 1.0)
	f.Add(uint8(3), uint8(0), 1.0, 2.0, 0.0, 0, int64(time.Second), 0.0, 0.0, 0.0)
	f.Add(uint8(0), uint8(1), math.Inf(1), math.NaN(), -0.0, -1, int64(-1), math.NaN(), math.Inf(-1), 1e308)
	kinds := []Kind{Coupled, AxisOnly, Timed, List, "bogus"}
	axes := []string{"", "theta", "twotheta", "chi", "omega"}
	f.Fuzz(func(t *testing.T, kind, axis uint8, from, to, step float64, points int, dwell int64, relErr, kv, ma float64) {
		cfg := testConfig()
		r := Request{Kind: kinds[int(kind)%len(kinds)], Axis: axes[int(axis)%len(axes)], FromDeg: from, ToDeg: to,
			StepDeg: step, Points: points, Dwell: time.Duration(dwell), RelativeError: relErr}
		switch r.Kind {
		case Timed:
			r.At = map[string]float64{r.Axis: from}
		case List:
			r.Positions = []map[string]float64{{r.Axis: from}, {r.Axis: to}}
		}
		if kv != 0 || ma != 0 {
			r.Source = &Source{KV: kv, MA: ma}
		}
		p, err := NewPlan(r, cfg)
		if err != nil {
			if len(validate.Fields(err)) == 0 {
				t.Fatalf("refusal without a field: %v", err)
			}
			return
		}
		if p.Len() < 1 || p.Len() > cfg.MaxPoints {
			t.Fatalf("%d points (maximum %d) for %+v", p.Len(), cfg.MaxPoints, r)
		}
		limits := map[string]instrument.Axis{}
		for _, a := range cfg.Axes {
			limits[a.Name] = a
		}
		for _, i := range []int{0, p.Len() / 2, p.Len() - 1} {
			for _, tg := range p.Targets(i) {
				a, ok := limits[tg.Axis]
				if !ok || math.IsNaN(tg.Deg) || tg.Deg < a.MinDeg-1e-9 || tg.Deg > a.MaxDeg+1e-9 {
					t.Fatalf("point %d targets %s at %v (limits %v to %v) for %+v", i, tg.Axis, tg.Deg, a.MinDeg, a.MaxDeg, r)
				}
			}
		}
	})
}
