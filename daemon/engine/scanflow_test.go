package engine_test

import (
	"context"
	"math"
	"strings"
	"testing"
	"time"

	"goniod/client"
	"goniod/daemon/server/servertest"
)

// A tube-voltage series runs its scans in order, each at its setting after the settle time, with high voltage
// on between them and off after the last; the series and each scan have IDs and the scans name the series.
func TestSeriesEndToEnd(t *testing.T) {
	// Speed 100: the 10 s settle takes 100 ms of wall time, long enough to see.
	d := servertest.Start(t, servertest.WithSim("speed", 100.0), servertest.WithSim("seed", int64(4)))
	ctx := context.Background()
	const settle = 10 * time.Second
	kvs := []float64{12, 20, 30}
	sr := client.SeriesRequest{Scan: client.ScanRequest{Kind: client.Coupled, From: 20, To: 20.4, Step: 0.1,
		Dwell: time.Second, Label: "LiF batch B"}, Settle: settle}
	for _, kv := range kvs {
		sr.Sources = append(sr.Sources, client.Source{KV: kv, MA: 0.8})
	}
	s, err := d.Client.SubmitSeries(ctx, sr)
	if err != nil {
		t.Fatal(err)
	}
	if !strings.HasPrefix(s.ID, "series-") || len(s.ScanIDs) != len(kvs) {
		t.Fatalf("series %+v", s)
	}
	if got, err := d.Client.Series(ctx, s.ID); err != nil || strings.Join(got.ScanIDs, ",") != strings.Join(s.ScanIDs, ",") {
		t.Fatalf("GetSeries: %+v %v", got, err)
	}
	var prevEnd time.Time
	for i, id := range s.ScanIDs {
		final, pts := d.WaitEnd(t, id)
		if final.State != client.Done || final.SeriesID != s.ID || final.Request.Label != "LiF batch B" {
			t.Fatalf("scan %s: %s (%s), series %q, label %q", id, final.State, final.Reason, final.SeriesID, final.Request.Label)
		}
		if final.Request.KeepHighVoltage != (i < len(kvs)-1) {
			t.Errorf("scan %d of the series keeps high voltage: %v", i, final.Request.KeepHighVoltage)
		}
		if final.Started.Before(prevEnd) {
			t.Errorf("scan %d started at %v, before the previous one ended at %v", i, final.Started, prevEnd)
		}
		prevEnd = final.Ended
		checkContiguous(t, pts, 5)
		for _, p := range pts {
			if p.KV != kvs[i] || p.MA != 0.8 {
				t.Fatalf("scan %d point %d at %g kV %g mA, want %g kV 0.8 mA", i, p.Index, p.KV, p.MA, kvs[i])
			}
		}
		// The wall time from start to the first point holds the settle time (at speed 100).
		if gap := pts[0].Time.Sub(final.Started); gap < settle/100 {
			t.Errorf("scan %d: first point %v after its start, less than the settle time %v", i, gap, settle/100)
		}
	}
	if highVoltage(t, d) {
		t.Error("high voltage on after the series")
	}

	// Asked to, the series leaves high voltage on at its end.
	sr.KeepHighVoltage, sr.Settle, sr.Sources = true, 0, sr.Sources[:2]
	s, err = d.Client.SubmitSeries(ctx, sr)
	if err != nil {
		t.Fatal(err)
	}
	for _, id := range s.ScanIDs {
		d.WaitEnd(t, id)
	}
	if !highVoltage(t, d) {
		t.Error("high voltage off after a series that asked to keep it")
	}
	off := false
	if _, err := d.Client.SetSource(ctx, client.SourceChange{HighVoltage: &off}); err != nil {
		t.Fatal(err)
	}
}

// Counting to precision stops each point once its relative Poisson error reaches the target, or at the longest
// dwell: strong points take less beam time than weak ones, and each point records the dwell it used.
func TestCountToPrecision(t *testing.T) {
	d := servertest.Start(t, servertest.WithSim("seed", int64(6)))
	ctx := context.Background()
	const rel, longest = 0.02, 20 * time.Second
	target := 1 / (rel * rel) // counts for a relative error of rel: σ_N/N = 1/√N (Poisson; common practice)
	// Across the first-order Cu Kα1 reflection of LiF at 30 kV: from the continuum's tens of counts per second
	// to the line's thousands.
	s, err := d.Client.Submit(ctx, client.ScanRequest{Kind: client.Coupled, From: 21.5, To: 23.5, Step: 0.05,
		Dwell: longest, RelativeError: rel, Source: &client.Source{KV: 30, MA: 1}})
	if err != nil {
		t.Fatal(err)
	}
	final, _ := d.WaitEnd(t, s.ID)
	if final.State != client.Done {
		t.Fatalf("ended %s: %s", final.State, final.Reason)
	}
	pts := readPoints(t, d, s.ID)
	checkContiguous(t, pts, 41)
	var short, capped int
	minDwell, maxDwell := math.Inf(1), 0.0
	for _, p := range pts {
		if p.Dwell <= 0 || p.Dwell > longest.Seconds()+1e-9 {
			t.Fatalf("point %d dwell %g s outside (0, %g]", p.Index, p.Dwell, longest.Seconds())
		}
		if math.Abs(p.Rate-float64(p.Counts)/p.Dwell) > 1e-9*p.Rate {
			t.Errorf("point %d: rate %g is not counts/dwell %d/%g: the recorded dwell is not the one used", p.Index, p.Rate, p.Counts, p.Dwell)
		}
		minDwell, maxDwell = math.Min(minDwell, p.Dwell), math.Max(maxDwell, p.Dwell)
		switch {
		case math.Abs(p.Dwell-longest.Seconds()) < 1e-6:
			capped++
			if float64(p.Counts) >= 1.1*target {
				t.Errorf("point %d used the whole dwell for %d counts, above the %g needed", p.Index, p.Counts, target)
			}
		default:
			short++
			if float64(p.Counts) < target {
				t.Errorf("point %d stopped at %d counts after %g s, short of the %g needed", p.Index, p.Counts, p.Dwell, target)
			}
			if float64(p.Counts) > 2*target {
				t.Errorf("point %d counted %d, far beyond the %g needed", p.Index, p.Counts, target)
			}
			if e := p.RateErr / p.Rate; e > rel {
				t.Errorf("point %d relative error %.4f above the target %g", p.Index, e, rel)
			}
		}
	}
	t.Logf("dwell from %.3f s to %.3f s; %d points reached %g %% early, %d used the longest dwell", minDwell, maxDwell, short, 100*rel, capped)
	if short == 0 || capped == 0 || maxDwell < 10*minDwell {
		t.Errorf("dwell did not adapt: %d short, %d capped, dwell %g–%g s", short, capped, minDwell, maxDwell)
	}
}

// Every point records index, requested and read-back angles of every axis, dwell, counts, rate and Poisson
// error, dead-time-corrected rate and error, tube setting, time, first-order wavelength and energy; every scan
// records its label, operator, note and where it was taken.
func TestEveryPointFieldAndMetadata(t *testing.T) {
	d := servertest.Start(t, servertest.WithSim("seed", int64(3)))
	ctx := context.Background()
	before := time.Now()
	s, err := d.Client.Submit(ctx, client.ScanRequest{Kind: client.Coupled, From: 22, To: 23, Step: 0.1, Dwell: 2 * time.Second,
		Source: &client.Source{KV: 25, MA: 0.6}, Label: "LiF A-7", Operator: "R. Ortega", Note: "first-order Kα"})
	if err != nil {
		t.Fatal(err)
	}
	final, _ := d.WaitEnd(t, s.ID)
	after := time.Now()
	cfg, err := d.Client.Config(ctx)
	if err != nil {
		t.Fatal(err)
	}
	in := final.Info
	if final.Request.Label != "LiF A-7" || final.Request.Operator != "R. Ortega" || final.Request.Note != "first-order Kα" {
		t.Errorf("metadata %q %q %q", final.Request.Label, final.Request.Operator, final.Request.Note)
	}
	if !strings.Contains(in.Identity, "simulated spectrometer") || in.Driver != "sim" || in.DaemonVersion != "test" ||
		in.ConfigHash == "" || in.ConfigHash != cfg.ConfigHash || in.Crystal != cfg.Crystal || in.Anode != "Cu" {
		t.Errorf("scan info %+v (config hash %s)", in, cfg.ConfigHash)
	}
	tau := cfg.DeadTime.Seconds()
	pts := readPoints(t, d, s.ID)
	checkContiguous(t, pts, 11)
	for i, p := range pts {
		if len(p.Axes) != 2 {
			t.Fatalf("point %d has %d axes", i, len(p.Axes))
		}
		for _, a := range p.Axes {
			want := 22 + float64(i)*0.1
			if a.Name == "twotheta" {
				want *= 2
			}
			if math.Abs(a.Set-want) > 1e-9 || math.Abs(a.Actual-want) > 0.001 {
				t.Errorf("point %d %s set %.9g read %.9g, want %.9g", i, a.Name, a.Set, a.Actual, want)
			}
		}
		n := float64(p.Counts)
		if p.Dwell != 2 || p.Counts == 0 || math.Abs(p.Rate-n/2) > 1e-9 || math.Abs(p.RateErr-math.Sqrt(n)/2) > 1e-9 {
			t.Errorf("point %d: dwell %g, counts %d, rate %g ± %g", i, p.Dwell, p.Counts, p.Rate, p.RateErr)
		}
		// Non-paralyzable dead time: n = m/(1 − mτ), σn = σm/(1 − mτ)² (Knoll, Radiation Detection and
		// Measurement, 4th ed., ch. 4).
		loss := 1 - p.Rate*tau
		if math.Abs(p.CorrectedRate-p.Rate/loss) > 1e-6*p.CorrectedRate || math.Abs(p.CorrectedRateErr-p.RateErr/(loss*loss)) > 1e-6*p.CorrectedRateErr {
			t.Errorf("point %d: corrected %g ± %g from %g ± %g with τ = %g s", i, p.CorrectedRate, p.CorrectedRateErr, p.Rate, p.RateErr, tau)
		}
		if p.KV != 25 || p.MA != 0.6 {
			t.Errorf("point %d tube %g kV %g mA", i, p.KV, p.MA)
		}
		if p.Time.Before(before) || p.Time.After(after) || (i > 0 && p.Time.Before(pts[i-1].Time)) {
			t.Errorf("point %d time %v outside the scan or out of order", i, p.Time)
		}
		// Bragg's law in first order, λ = 2d·sin θ, and E = hc/λ with hc = 1.239841984 keV·nm (CODATA 2018).
		theta, _ := p.Angle("theta")
		wl := 2 * cfg.CrystalDNM * math.Sin(theta*math.Pi/180)
		if math.Abs(p.WavelengthNM-wl) > 1e-12 || math.Abs(p.EnergyKeV-1.239841984/wl) > 1e-6 {
			t.Errorf("point %d: λ %g nm, E %g keV at θ %g; want %g nm, %g keV", i, p.WavelengthNM, p.EnergyKeV, theta, wl, 1.239841984/wl)
		}
	}
}
