package server_test

import (
	"bytes"
	"context"
	"errors"
	"math"
	"strings"
	"testing"
	"time"

	"google.golang.org/grpc/codes"

	"goniod/client"
	"goniod/daemon/config"
	"goniod/daemon/server/servertest"
)

// Reference values for the Bragg angle check, independent of the project's tables:
// Cu Kα1 (KL3) = 8047.8227 eV, NIST SRD 128 (Deslattes et al., Rev. Mod. Phys. 75, 35, 2003);
// LiF a = 0.402630 nm, d(200) = a/2 (Wyckoff, Crystal Structures, 1965, as carried by xraylib);
// hc = 1.239841984 keV·nm (CODATA 2018).
const (
	cuKa1keV = 8.0478227
	lifD200  = 0.402630 / 2
	hcKeVnm  = 1.239841984
)

func braggDeg(keV, d float64, n int) float64 {
	return math.Asin(float64(n)*hcKeVnm/keV/(2*d)) * 180 / math.Pi
}

func TestCoupledScanEndToEnd(t *testing.T) {
	d := servertest.Start(t, servertest.WithSim("seed", int64(11)))
	ctx := context.Background()
	s, err := d.Client.Submit(ctx, client.ScanRequest{Kind: client.Coupled, From: 10, To: 30, Step: 0.1,
		Dwell: time.Second, Source: &client.Source{KV: 30, MA: 0.8}, Label: "LiF batch A"})
	if err != nil {
		t.Fatal(err)
	}
	if s.PointsTotal != 201 {
		t.Fatalf("planned %d points, want 201 (10° to 30° by 0.1°, end included)", s.PointsTotal)
	}
	final, watched := d.WaitEnd(t, s.ID)
	if final.State != client.Done {
		t.Fatalf("scan ended %s: %s", final.State, final.Reason)
	}
	var csv bytes.Buffer
	n, err := d.Client.Fetch(ctx, s.ID, client.CSV, &csv)
	if err != nil {
		t.Fatal(err)
	}
	if n != 201 || len(watched) != 201 {
		t.Fatalf("fetched %d and watched %d points, want 201", n, len(watched))
	}
	header := strings.Split(strings.SplitN(csv.String(), "\n", 2)[0], ",")
	for _, col := range []string{"theta_deg", "twotheta_deg", "dwell_s", "counts", "rate_cps", "rate_err_cps"} {
		if !contains(header, col) {
			t.Errorf("CSV header %v lacks %s", header, col)
		}
	}
	pts := d.Points(t, s.ID)
	best := 0
	for i, p := range pts {
		theta, _ := p.Angle("theta")
		twoTheta, _ := p.Angle("twotheta")
		if p.Index != i {
			t.Fatalf("point %d has index %d", i, p.Index)
		}
		want := 10 + float64(i)*0.1
		if math.Abs(p.Axes[0].Set-want) > 1e-9 || math.Abs(theta-want) > 0.0005 {
			t.Errorf("point %d: theta set %.10g read %.10g, want %.10g (start + i·step)", i, p.Axes[0].Set, theta, want)
		}
		if math.Abs(twoTheta-2*theta) > 0.001 {
			t.Errorf("point %d: twotheta %.4f is not 2·theta %.4f", i, twoTheta, 2*theta)
		}
		if p.Dwell != 1 || p.KV != 30 || p.MA != 0.8 {
			t.Errorf("point %d: dwell %g s, tube %g kV %g mA; want 1 s, 30 kV, 0.8 mA", i, p.Dwell, p.KV, p.MA)
		}
		if math.Abs(p.RateErr-math.Sqrt(float64(p.Counts))/p.Dwell) > 1e-9 {
			t.Errorf("point %d: rate error %g is not √N/t", i, p.RateErr)
		}
		if watched[i].Counts != p.Counts {
			t.Errorf("point %d: watched %d counts, stored %d", i, watched[i].Counts, p.Counts)
		}
		if p.Counts > pts[best].Counts {
			best = i
		}
	}
	top, _ := pts[best].Angle("theta")
	ref := braggDeg(cuKa1keV, lifD200, 1)
	if math.Abs(top-ref) > 0.2 {
		t.Errorf("largest peak at θ = %.3f°, Cu Kα1 on LiF(200) is at %.3f°", top, ref)
	}
	t.Logf("largest peak θ = %.3f° (%d counts); Cu Kα1/LiF(200) reference %.3f°", top, pts[best].Counts, ref)
}

func contains(xs []string, x string) bool {
	for _, v := range xs {
		if v == x {
			return true
		}
	}
	return false
}

func TestBadRequestsRefusedByField(t *testing.T) {
	d := servertest.Start(t)
	ctx := context.Background()
	ok := client.ScanRequest{Kind: client.Coupled, From: 10, To: 30, Step: 0.1, Dwell: time.Second}
	with := func(f func(*client.ScanRequest)) client.ScanRequest { r := ok; f(&r); return r }
	cases := []struct {
		name  string
		req   client.ScanRequest
		field string
	}{
		{"zero step", with(func(r *client.ScanRequest) { r.Step = 0 }), "step_deg"},
		{"negative step", with(func(r *client.ScanRequest) { r.Step = -0.1 }), "step_deg"},
		{"NaN start", with(func(r *client.ScanRequest) { r.From = math.NaN() }), "from_deg"},
		{"infinite end", with(func(r *client.ScanRequest) { r.To = math.Inf(1) }), "to_deg"},
		{"step finer than resolution", with(func(r *client.ScanRequest) { r.Step = 1e-5 }), "step_deg"},
		{"beyond the axis limit", with(func(r *client.ScanRequest) { r.To = 120 }), "to_deg"},
		{"start beyond the limit", with(func(r *client.ScanRequest) { r.From = -50 }), "from_deg"},
		{"too many points", with(func(r *client.ScanRequest) { r.From, r.To, r.Step = 0, 90, 0.00005 }), "step_deg"},
		{"zero dwell", with(func(r *client.ScanRequest) { r.Dwell = 0 }), "dwell"},
		{"negative dwell", with(func(r *client.ScanRequest) { r.Dwell = -time.Second }), "dwell"},
		{"dwell too long", with(func(r *client.ScanRequest) { r.Dwell = 48 * time.Hour }), "dwell"},
		{"unknown axis", client.ScanRequest{Kind: client.Axis, Axis: "chi", From: 1, To: 2, Step: 0.1, Dwell: time.Second}, "axis"},
		{"unknown lead axis", with(func(r *client.ScanRequest) { r.Axis = "omega" }), "lead_axis"},
		{"no kind", client.ScanRequest{Dwell: time.Second}, "kind"},
		{"voltage beyond rating", with(func(r *client.ScanRequest) { r.Source = &client.Source{KV: 80, MA: 0.5} }), "source.kv"},
		{"negative current", with(func(r *client.ScanRequest) { r.Source = &client.Source{KV: 20, MA: -1} }), "source.ma"},
		{"timed without points", client.ScanRequest{Kind: client.Timed, Dwell: time.Second}, "timed.points"},
		{"list position beyond limit", client.ScanRequest{Kind: client.List, Dwell: time.Second,
			Positions: []map[string]float64{{"theta": 10}, {"theta": 500}}}, "positions[1].theta"},
		{"precision out of range", with(func(r *client.ScanRequest) { r.RelativeError = 2 }), "relative_error"},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			_, err := d.Client.Submit(ctx, tc.req)
			if !errors.Is(err, client.ErrInvalid) {
				t.Fatalf("got %v, want an InvalidArgument refusal", err)
			}
			fields := client.FieldErrors(err)
			found := false
			for _, f := range fields {
				if strings.Contains(f.Field, tc.field) && f.Reason != "" {
					found = true
				}
			}
			if !found || !strings.Contains(err.Error(), tc.field) {
				t.Errorf("error %q (fields %v) does not name %s", err, fields, tc.field)
			}
		})
	}
	scans, _, err := d.Client.List(ctx, client.ListOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if len(scans) != 0 {
		t.Errorf("%d scans queued by refused requests", len(scans))
	}
	if _, err := d.Client.State(ctx); err != nil {
		t.Errorf("daemon not serving after bad requests: %v", err)
	}
}

// The scans waiting to run are capped (limits.max_queued): a submission past the cap is refused whole with
// ResourceExhausted naming the limit, and a cancelled scan makes room again.
func TestQueueLimit(t *testing.T) {
	d := servertest.Start(t, servertest.WithConfig(func(f *config.File) { f.Limits.MaxQueued = 3 }))
	ctx := context.Background()
	long := client.ScanRequest{Kind: client.Timed, Points: 1000, Dwell: time.Hour} // 0.36 s a point at the test speed
	running, err := d.Client.Submit(ctx, long)
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { d.Client.Cancel(context.Background(), running.ID) })
	for {
		s, err := d.Client.Scan(ctx, running.ID)
		if err != nil {
			t.Fatal(err)
		}
		if s.State == client.Running {
			break
		}
		time.Sleep(5 * time.Millisecond)
	}
	short := client.ScanRequest{Kind: client.Timed, Points: 1, Dwell: time.Second}
	var queued []string
	for range 3 {
		s, err := d.Client.Submit(ctx, short)
		if err != nil {
			t.Fatalf("scan %d of the limit: %v", len(queued)+1, err)
		}
		queued = append(queued, s.ID)
	}
	_, err = d.Client.Submit(ctx, short)
	if !errors.Is(err, client.ErrRefused) {
		t.Fatalf("fourth waiting scan: %v, want a refusal", err)
	}
	var ce *client.Error
	if !errors.As(err, &ce) || ce.Code != codes.ResourceExhausted || !strings.Contains(err.Error(), "limits.max_queued") ||
		!strings.Contains(err.Error(), "3") {
		t.Errorf("refusal %v does not say ResourceExhausted and name the limit", err)
	}
	if _, err := d.Client.SubmitSeries(ctx, client.SeriesRequest{Scan: short, Sources: []client.Source{{KV: 20, MA: 0.5}, {KV: 25, MA: 0.5}}}); !errors.Is(err, client.ErrRefused) {
		t.Errorf("a series past the limit: %v, want a refusal", err)
	}
	all, _, err := d.Client.List(ctx, client.ListOptions{})
	if err != nil || len(all) != 4 {
		t.Fatalf("%d scans known after the refusals (%v), want the running one and 3 queued", len(all), err)
	}
	if _, err := d.Client.Cancel(ctx, queued[0]); err != nil {
		t.Fatal(err)
	}
	if _, err := d.Client.Submit(ctx, short); err != nil {
		t.Errorf("after a cancel made room: %v", err)
	}
}
