package engine_test

import (
	"context"
	"errors"
	"math"
	"strings"
	"testing"
	"time"

	"goniod/client"
	"goniod/daemon/server/servertest"
)

// The simulator's zero offsets (motor angle − true angle) are recovered by the alignment within 0.02°, the
// daemon's alignment target; stored, they survive a restart and put the Cu Kα1 reflection at its published
// angle.
func TestAlignRecoversZeroOffsets(t *testing.T) {
	const thetaOff, twoThetaOff = 0.37, -0.52
	offsets := []servertest.Option{servertest.WithSim("seed", int64(5)),
		servertest.WithSim("theta_offset_deg", thetaOff), servertest.WithSim("twotheta_offset_deg", twoThetaOff)}
	d := servertest.Start(t, offsets...)
	ctx := context.Background()
	a, err := d.Client.Align(ctx, client.AlignOptions{Store: true, Source: &client.Source{KV: 30, MA: 1}})
	if err != nil {
		t.Fatal(err)
	}
	t.Logf("alignment on %s: %+v (scans %v)", a.Reference, a.Offsets, a.ScanIDs)
	want := map[string]float64{"theta": thetaOff, "twotheta": twoThetaOff}
	for _, o := range a.Offsets {
		if math.Abs(o.OffsetDeg-want[o.Axis]) > 0.02 {
			t.Errorf("%s offset %.4f° ± %.4f°, configured %.2f°", o.Axis, o.OffsetDeg, o.ErrDeg, want[o.Axis])
		}
		if !(o.ErrDeg > 0 && o.ErrDeg < 0.02) {
			t.Errorf("%s offset error %.4g°, want a positive error below 0.02°", o.Axis, o.ErrDeg)
		}
	}
	if !a.Stored || len(a.ScanIDs) != 4 || len(a.Offsets) != 2 {
		t.Fatalf("stored %v, %d scans, %d offsets", a.Stored, len(a.ScanIDs), len(a.Offsets))
	}
	st, err := d.Client.State(ctx)
	if err != nil {
		t.Fatal(err)
	}
	if st.HighVoltage {
		t.Error("high voltage left on after the alignment")
	}

	// After a restart the stored offsets apply: the configuration shows them, a second alignment finds
	// nothing left to correct, and the reflection appears at its published angle.
	d.Stop(t)
	d = servertest.Start(t, append(offsets, servertest.WithData(d.Data))...)
	cfg, err := d.Client.Config(ctx)
	if err != nil {
		t.Fatal(err)
	}
	for _, ax := range cfg.Axes {
		for _, o := range a.Offsets {
			if o.Axis == ax.Name && ax.ZeroOffsetDeg != o.OffsetDeg {
				t.Errorf("after a restart %s has zero offset %g°, stored %g°", ax.Name, ax.ZeroOffsetDeg, o.OffsetDeg)
			}
		}
	}
	again, err := d.Client.Align(ctx, client.AlignOptions{Source: &client.Source{KV: 30, MA: 1}})
	if err != nil {
		t.Fatal(err)
	}
	for _, o := range again.Offsets {
		if math.Abs(o.OffsetDeg-o.PreviousDeg) > 0.02 {
			t.Errorf("second alignment moves %s by %.4f°", o.Axis, o.OffsetDeg-o.PreviousDeg)
		}
	}
	if again.Stored {
		t.Error("an alignment not asked to store says it stored")
	}
	s, err := d.Client.Submit(ctx, client.ScanRequest{Kind: client.Coupled, From: 49.7, To: 50.2, Step: 0.005,
		Dwell: 2 * time.Second, Source: &client.Source{KV: 30, MA: 1}})
	if err != nil {
		t.Fatal(err)
	}
	if final, _ := d.WaitEnd(t, s.ID); final.State != client.Done {
		t.Fatalf("check scan ended %s: %s", final.State, final.Reason)
	}
	// Cu Kα1 = 8.0478227 keV, NIST SRD 128 (Deslattes et al., Rev. Mod. Phys. 75, 35, 2003); LiF(200)
	// d = 0.402630/2 nm (Wyckoff, Crystal Structures, 1965, via xraylib); hc = 1.239841984 keV·nm (CODATA 2018).
	ref := math.Asin(2*1.239841984/8.0478227/(2*0.402630/2)) * 180 / math.Pi
	got := halfMaxCentre(t, readPoints(t, d, s.ID), "theta")
	t.Logf("second-order Cu Kα1 at θ = %.4f° after alignment; published %.4f°", got, ref)
	if math.Abs(got-ref) > 0.02 {
		t.Errorf("second-order Cu Kα1 at θ = %.4f° after alignment, published %.4f°", got, ref)
	}
}

// halfMaxCentre is the midpoint of the half-maximum crossings around the highest point of a profile over axis,
// interpolated between points, the background taken from the lower end.
func halfMaxCentre(t *testing.T, pts []client.Point, axis string) float64 {
	t.Helper()
	x, y := make([]float64, len(pts)), make([]float64, len(pts))
	top := 0
	for i, p := range pts {
		x[i], _ = p.Angle(axis)
		y[i] = p.CorrectedRate
		if y[i] > y[top] {
			top = i
		}
	}
	half := (y[top] + math.Min(y[0], y[len(y)-1])) / 2
	l, r := top, top
	for l > 0 && y[l-1] >= half {
		l--
	}
	for r < len(y)-1 && y[r+1] >= half {
		r++
	}
	if l == 0 || r == len(y)-1 {
		t.Fatalf("peak at %g° not inside the scan", x[top])
	}
	left := x[l-1] + (half-y[l-1])/(y[l]-y[l-1])*(x[l]-x[l-1])
	right := x[r] + (y[r]-half)/(y[r]-y[r+1])*(x[r+1]-x[r])
	return (left + right) / 2
}

// Offsets beyond the default search are found with a wider one; without it the alignment fails saying so,
// stores nothing and leaves high voltage off.
func TestAlignSearchWidth(t *testing.T) {
	const thetaOff, twoThetaOff = -1.8, 2.5
	d := servertest.Start(t, servertest.WithSim("seed", int64(12)),
		servertest.WithSim("theta_offset_deg", thetaOff), servertest.WithSim("twotheta_offset_deg", twoThetaOff))
	ctx := context.Background()
	src := &client.Source{KV: 30, MA: 1}
	_, err := d.Client.Align(ctx, client.AlignOptions{Source: src, Store: true})
	if err == nil || !strings.Contains(err.Error(), "widen the search") {
		t.Fatalf("alignment with the beam beyond the search: %v, want a failure saying to widen the search", err)
	}
	if highVoltage(t, d) {
		t.Error("high voltage on after a failed alignment")
	}
	cfg, _ := d.Client.Config(ctx)
	for _, a := range cfg.Axes {
		if a.ZeroOffsetDeg != 0 {
			t.Errorf("a failed alignment changed %s's offset to %g°", a.Name, a.ZeroOffsetDeg)
		}
	}
	a, err := d.Client.Align(ctx, client.AlignOptions{Source: src, SearchDeg: 3, Dwell: 2 * time.Second})
	if err != nil {
		t.Fatal(err)
	}
	want := map[string]float64{"theta": thetaOff, "twotheta": twoThetaOff}
	for _, o := range a.Offsets {
		if math.Abs(o.OffsetDeg-want[o.Axis]) > 0.02 {
			t.Errorf("%s offset %.4f° ± %.4f°, configured %g°", o.Axis, o.OffsetDeg, o.ErrDeg, want[o.Axis])
		}
	}
	if _, err := d.Client.Align(ctx, client.AlignOptions{Source: src, SearchDeg: 9}); !errors.Is(err, client.ErrInvalid) || !strings.Contains(err.Error(), "search_deg") {
		t.Errorf("search of 9°: %v, want a refusal naming search_deg", err)
	}
}
