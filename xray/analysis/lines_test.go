package analysis

import (
	"math"
	"math/rand/v2"
	"testing"

	"goniod/xray"
)

// TestIdentifyLinesCuOnLiF: the demo scenario's lines, orders 1 and 2, are all identified with the right
// label, the NIST SRD 128 energy, a residual within 3σ of the fit, and nothing left unmatched. The unresolved
// first-order Kα1/Kα2 blend is refitted as a doublet, so its reported centre is Kα1's.
func TestIdentifyLinesCuOnLiF(t *testing.T) {
	sy := cuOnLiF(18, 52, 0.01)
	cu, err := xray.LookupAnode("Cu")
	if err != nil {
		t.Fatal(err)
	}
	want := []struct {
		label  string
		keV    float64 // NIST SRD 128
		order  int
		paired bool
	}{
		{"Kβ1, n = 1", refCuKb1, 1, false}, {"Kα1, n = 1", refCuKa1, 1, true},
		{"Kβ1, n = 2", refCuKb1, 2, false}, {"Kα1, n = 2", refCuKa1, 2, false}, {"Kα2, n = 2", refCuKa2, 2, false},
	}
	rng := rand.New(rand.NewPCG(41, 42))
	for run := range 10 {
		s := sy.scan(t, rng)
		ps, err := FindPeaks(s, PeakOptions{})
		if err != nil {
			t.Fatal(err)
		}
		ls, err := IdentifyLines(s, ps, cu, refLiF200, LineOptions{})
		if err != nil {
			t.Fatal(err)
		}
		if len(ls.Matches) != len(want) || len(ls.Unmatched) != 0 {
			t.Fatalf("run %d: %d matches, %d unmatched; want %d, 0: %+v", run, len(ls.Matches), len(ls.Unmatched), len(want), ls)
		}
		for k, w := range want {
			m := ls.Matches[k]
			exp := braggDeg(w.keV, refLiF200, w.order)
			if m.Label() != w.label || math.Abs(m.Line.EnergyKeV-w.keV) > 1e-6 || math.Abs(m.ExpectedDeg-exp) > 1e-6 {
				t.Errorf("run %d: match %d is %s at %.6f keV, expected %.6f°; want %s, %.6f keV, %.6f°",
					run, k, m.Label(), m.Line.EnergyKeV, m.ExpectedDeg, w.label, w.keV, exp)
			}
			if math.Abs(m.ResidualDeg) > 3*m.Peak.Centre.Err+1e-4 || m.Doublet != w.paired {
				t.Errorf("run %d: %s residual %.5f° (σ %.5f°), doublet %v", run, m.Label(), m.ResidualDeg, m.Peak.Centre.Err, m.Doublet)
			}
		}
	}
}

// TestIdentifyLinesThirdOrderMo: Mo lines on LiF(200) up to the third order (NIST SRD 128 energies).
func TestIdentifyLinesThirdOrderMo(t *testing.T) {
	sy := synth{from: 15, to: 34, step: 0.01, dwell: 1, bg0: 3}
	type line struct {
		name string
		keV  float64
	}
	var want []string
	for n := 2; n <= 3; n++ {
		for _, l := range []line{{"Kα1", refMoKa1}, {"Kα2", refMoKa2}, {"Kβ1", refMoKb1}} {
			sy.lines = append(sy.lines, synthLine{centre: braggDeg(l.keV, refLiF200, n), fwhm: 0.06, area: 20})
			want = append(want, (LineMatch{Line: xray.Line{Name: l.name}, Order: n}).Label())
		}
	}
	mo, _ := xray.LookupAnode("Mo")
	s := sy.scan(t, nil)
	ps, _ := FindPeaks(s, PeakOptions{})
	ls, err := IdentifyLines(s, ps, mo, refLiF200, LineOptions{})
	if err != nil {
		t.Fatal(err)
	}
	got := map[string]bool{}
	for _, m := range ls.Matches {
		got[m.Label()] = true
		if math.Abs(m.ResidualDeg) > 1e-4 {
			t.Errorf("%s: residual %.6f° on noise-free data", m.Label(), m.ResidualDeg)
		}
	}
	for _, w := range want {
		if !got[w] {
			t.Errorf("%s not identified; got %v", w, got)
		}
	}
}

func TestIdentifyLinesLeavesStrangersUnmatched(t *testing.T) {
	sy := synth{from: 30, to: 36, step: 0.01, dwell: 1, bg0: 3, lines: []synthLine{{33, 0.08, 30}}}
	s := sy.scan(t, nil)
	ps, _ := FindPeaks(s, PeakOptions{})
	cu, _ := xray.LookupAnode("Cu")
	ls, err := IdentifyLines(s, ps, cu, refLiF200, LineOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if len(ls.Matches) != 0 || len(ls.Unmatched) != 1 {
		t.Errorf("a peak at 33° (no Cu line on LiF) gave %d matches, %d unmatched", len(ls.Matches), len(ls.Unmatched))
	}
	for _, o := range []LineOptions{{ToleranceDeg: -1}, {MaxOrder: 21}} {
		if _, err := IdentifyLines(s, ps, cu, refLiF200, o); err == nil {
			t.Errorf("options %+v accepted", o)
		}
	}
	if _, err := IdentifyLines(s, ps, cu, 0, LineOptions{}); err == nil {
		t.Error("d = 0 accepted")
	}
}
