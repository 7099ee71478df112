package api_test

import (
	"context"
	"errors"
	"math"
	"testing"
	"time"

	"goniod/client"
	"goniod/daemon/server/servertest"
)

// startDaemon runs goniod on the simulator (fast simulated time, seed 7) with real gRPC on loopback and a
// temporary data directory, and returns a connected client; both stop when the test ends.
func startDaemon(t *testing.T) *client.Client {
	t.Helper()
	return servertest.Start(t, servertest.WithSim("seed", int64(7))).Client
}

// runScan submits a scan and waits for it to end.
func runScan(t *testing.T, c *client.Client, r client.ScanRequest) string {
	t.Helper()
	ctx := context.Background()
	s, err := c.Submit(ctx, r)
	if err != nil {
		t.Fatal(err)
	}
	deadline := time.Now().Add(2 * time.Minute)
	for time.Now().Before(deadline) {
		got, err := c.Scan(ctx, s.ID)
		if err != nil {
			t.Fatal(err)
		}
		if got.State.Terminal() {
			if got.State != client.Done {
				t.Fatalf("scan %s ended %s: %s", s.ID, got.State, got.Reason)
			}
			return s.ID
		}
		time.Sleep(20 * time.Millisecond)
	}
	t.Fatalf("scan %s did not end", s.ID)
	return ""
}

// Reference values: Cu Kα1, Kβ1 from NIST SRD 128 (Deslattes et al., Rev. Mod. Phys. 75, 35, 2003);
// LiF d(200) = 0.402630/2 nm (Wyckoff, Crystal Structures, 1965, as carried by xraylib); hc = 1.239841984
// keV·nm and h = 6.62607015e-34 J s (CODATA 2018).
const (
	cuKa1, cuKb1 = 8.0478227, 8.905413
	lifD         = 0.402630 / 2
	hcKeVnm      = 1.239841984
	planckJs     = 6.62607015e-34
)

func bragg(keV float64, n int) float64 {
	return math.Asin(float64(n)*hcKeVnm/keV/(2*lifD)) * 180 / math.Pi
}

// TestAnalysisOnSimulatedScans: coupled scans of the demo scenario on the simulator, analysed through the API:
// the lines are identified, the lattice spacing is within 0.1 % of the handbook value, results are saved and
// fetched back, and bad requests are refused naming the field.
func TestAnalysisOnSimulatedScans(t *testing.T) {
	c := startDaemon(t)
	ctx := context.Background()
	var ids []string
	for _, n := range []int{1, 2} {
		for _, keV := range []float64{cuKb1, cuKa1} {
			th := bragg(keV, n)
			ids = append(ids, runScan(t, c, client.ScanRequest{Kind: client.Coupled, From: th - 0.5, To: th + 0.7, Step: 0.01,
				Dwell: time.Second, Source: &client.Source{KV: 30, MA: 0.8}}))
		}
	}
	lines, err := c.IdentifyLines(ctx, ids[1], client.LineOptions{Save: true})
	if err != nil {
		t.Fatal(err)
	}
	found := false
	for _, m := range lines.Matches {
		if m.Line == "Kα1" && m.Order == 1 {
			found = true
			if math.Abs(m.ResidualDeg) > 0.01 {
				t.Errorf("Kα1, n = 1: residual %.4f°", m.ResidualDeg)
			}
		}
	}
	if !found {
		t.Fatalf("Kα1, n = 1 not identified: %+v", lines)
	}
	lat, err := c.FitLattice(ctx, ids, nil, client.LatticeOptions{Save: true})
	if err != nil {
		t.Fatal(err)
	}
	if rel := lat.DNM.Value/lifD - 1; math.Abs(rel) > 1e-3 || len(lat.Used) < 4 {
		t.Errorf("d = %.6f ± %.6f nm from %d reflections: %.2g from the handbook %.6f", lat.DNM.Value, lat.DNM.Err, len(lat.Used), rel, lifD)
	}
	t.Logf("simulated scans: d = %.6f ± %.6f nm (handbook %.6f, %.2g), %d reflections, χ²ν %.2f",
		lat.DNM.Value, lat.DNM.Err, lifD, lat.DNM.Value/lifD-1, len(lat.Used), lat.ReducedChi2)
	saved, err := c.SavedResult(ctx, ids[2], client.LatticeResult)
	if err != nil || saved.Lattice == nil || saved.Lattice.DNM != lat.DNM {
		t.Errorf("saved lattice %+v, %v; want %+v", saved.Lattice, err, lat.DNM)
	}
	if _, err := c.SavedResult(ctx, ids[0], client.WidthResult); !errors.Is(err, client.ErrNotFound) {
		t.Errorf("unsaved result: err = %v, want ErrNotFound", err)
	}
	w, err := c.MeasureWidth(ctx, ids[1], client.PeakOptions{})
	if err != nil || !(w.FWHMFitDeg.Value > 0) || !(w.FWHMInterpDeg.Value > 0) {
		t.Errorf("width %+v, %v", w, err)
	}
	_, err = c.FindPeaks(ctx, ids[0], client.PeakOptions{Significance: -3})
	if fe := client.FieldErrors(err); !errors.Is(err, client.ErrInvalid) || len(fe) != 1 || fe[0].Field != "significance" {
		t.Errorf("significance −3: err = %v, fields %+v", err, fe)
	}
	_, err = c.FindPeaks(ctx, "scan-999999", client.PeakOptions{})
	if fe := client.FieldErrors(err); len(fe) != 1 || fe[0].Field != "data.scan_id" {
		t.Errorf("unknown scan: err = %v", err)
	}
}

// TestPlanckFromSimulatedVoltageSeries: the short-wavelength limit of simulated scans at 12–30 kV, fitted
// against 1/U, gives Planck's constant within 2 % of CODATA 2018.
func TestPlanckFromSimulatedVoltageSeries(t *testing.T) {
	c := startDaemon(t)
	var ids []string
	for _, kv := range []float64{12, 15, 18, 21, 24, 27, 30} {
		th := bragg(kv, 1) // the Bragg angle of λmin = hc/(eU)
		ids = append(ids, runScan(t, c, client.ScanRequest{Kind: client.Coupled, From: th - 1, To: th * 1.3, Step: 0.02,
			Dwell: time.Second, Source: &client.Source{KV: kv, MA: 0.8}}))
	}
	res, err := c.FitLimit(context.Background(), ids, true)
	if err != nil {
		t.Fatal(err)
	}
	if res.PlanckJs == nil {
		t.Fatalf("no Planck's constant: %+v", res)
	}
	rel := res.PlanckJs.Value/planckJs - 1
	if math.Abs(rel) > 0.02 {
		t.Errorf("h = %.4g ± %.2g J s, %.2g from CODATA 2018", res.PlanckJs.Value, res.PlanckJs.Err, rel)
	}
	t.Logf("simulated voltage series: h = %.5g ± %.2g J s (%.2g from CODATA 2018), χ²ν %.2f", res.PlanckJs.Value, res.PlanckJs.Err, rel, res.ReducedChi2)
	for _, l := range res.Limits {
		t.Logf("%g kV: λmin = %.5f ± %.5f nm (hc/eU = %.5f)", l.KV, l.WavelengthNM.Value, l.WavelengthNM.Err, hcKeVnm/l.KV)
	}
}
