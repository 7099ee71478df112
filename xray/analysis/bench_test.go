package analysis

import (
	"math"
	"math/rand/v2"
	"testing"

	"goniod/xray"
)

// BenchmarkFullAnalysis runs peaks, fits, line identification and the lattice fit on a 10,000-point coupled
// scan (Cu on LiF(200), θ 10°–55°). Target: under 10 ms per analysis.
func BenchmarkFullAnalysis(b *testing.B) {
	sy := cuOnLiF(10, 55, 45.0/9999)
	s := sy.scan(b, rand.New(rand.NewPCG(1, 1)))
	if s.Len() != 10000 {
		b.Fatalf("%d points", s.Len())
	}
	cu, _ := xray.LookupAnode("Cu")
	b.ReportAllocs()
	for b.Loop() {
		ps, err := FindPeaks(s, PeakOptions{})
		if err != nil {
			b.Fatal(err)
		}
		ls, err := IdentifyLines(s, ps, cu, refLiF200, LineOptions{})
		if err != nil {
			b.Fatal(err)
		}
		lat, err := FitLattice(ReflectionsOf(ls), DefaultAngleErrDeg)
		if err != nil || len(ls.Matches) != 5 || math.Abs(lat.D.Value/refLiF200-1) > 1e-3 {
			b.Fatalf("%d lines, d = %g, %v", len(ls.Matches), lat.D.Value, err)
		}
	}
}

// FuzzFindPeaks feeds arbitrary counts, angles and dwell times through the whole chain: whatever the data, it
// must not panic, and every reported number must be finite.
func FuzzFindPeaks(f *testing.F) {
	f.Add([]byte{0, 1, 2, 3, 200, 255, 3, 2, 1, 0, 0, 0}, 0.01, 5.0)
	f.Add([]byte{9, 9, 9, 9, 9, 9, 9, 9, 9, 9}, -0.5, 2.0)
	f.Add([]byte{255, 0, 255, 0, 255, 0, 255, 0}, 1e-6, 50.0)
	cu, _ := xray.LookupAnode("Cu")
	f.Fuzz(func(t *testing.T, data []byte, step, k float64) {
		if len(data) > 4000 {
			return
		}
		n := len(data)
		x, c, d := make([]float64, n), make([]float64, n), make([]float64, n)
		for i, v := range data {
			x[i], c[i], d[i] = 20+step*float64(i), float64(v)*float64(v), 0.5+float64(i%3)
		}
		s, err := NewScan(x, c, d, DeadTime{Tau: 1e-4})
		if err != nil {
			return
		}
		ps, err := FindPeaks(s, PeakOptions{Significance: k})
		if err != nil {
			return
		}
		for _, p := range ps.Peaks {
			for _, v := range []float64{p.Centre.Value, p.Centre.Err, p.FWHM.Value, p.FWHM.Err, p.Area.Value, p.Area.Err, p.ReducedChi2} {
				if math.IsNaN(v) || math.IsInf(v, 0) {
					t.Fatalf("non-finite result %+v", p)
				}
			}
		}
		ls, err := IdentifyLines(s, ps, cu, refLiF200, LineOptions{})
		if err == nil && len(ls.Matches) > 0 {
			_, _ = FitLattice(ReflectionsOf(ls), DefaultAngleErrDeg)
		}
		_, _ = MeasureWidth(s, PeakOptions{Significance: k})
		_, _ = DuaneHunt(s, refLiF200, 0)
	})
}
