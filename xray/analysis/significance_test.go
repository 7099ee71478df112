package analysis

import (
	"fmt"
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/stat/distuv"
)

// TestOnOffZAgainstPoisson: with a background known exactly (alpha → 0) the test is the Poisson upper tail
// P(N ≥ n | μ), here from gonum's Poisson distribution.
func TestOnOffZAgainstPoisson(t *testing.T) {
	for _, c := range []struct{ n, mu float64 }{{3, 0.3}, {10, 2}, {30, 12}, {140, 100}, {1200, 1000}} {
		p := 1 - distuv.Poisson{Lambda: c.mu}.CDF(c.n-1)
		want := -distuv.UnitNormal.Quantile(p)
		if got := onOffZ(c.n, c.mu, 1e-9); math.Abs(got-want) > 1e-3*want {
			t.Errorf("n = %g, μ = %g: z = %.6g, Poisson tail gives %.6g", c.n, c.mu, got, want)
		}
	}
	if z := onOffZ(5, 5, 0.1); z != 0 {
		t.Errorf("no excess gave z = %g", z)
	}
	if z := onOffZ(1e6, 1, 0.01); !(z > 30) || math.IsInf(z, 0) {
		t.Errorf("far tail: z = %g, want large and finite (Li & Ma)", z)
	}
}

// flatScan is pure background: Poisson counts of mean mu per point.
func flatScan(t testing.TB, n int, mu float64, rng *rand.Rand) *Scan {
	t.Helper()
	x, c, d := make([]float64, n), make([]float64, n), make([]float64, n)
	for i := range n {
		x[i], d[i], c[i] = 10+0.01*float64(i), 1, poisson(rng, mu)
	}
	s, err := NewScan(x, c, d, DeadTime{})
	if err != nil {
		t.Fatal(err)
	}
	return s
}

// TestSignificanceCalibrated checks the stated false-alarm rate on pure background: the fraction of points at
// or above k σ must not exceed the one-sided Gaussian tail Q(k) (FalseAlarmPerPoint) beyond the sampling
// error of the count, at background levels from a fraction of a count per point to hundreds.
func TestSignificanceCalibrated(t *testing.T) {
	rng := rand.New(rand.NewPCG(11, 12))
	for _, mu := range []float64{0.3, 3, 30, 300} {
		for _, k := range []float64{2, 3} {
			for _, width := range []int{1, 5} {
				t.Run(fmt.Sprintf("mu=%g/k=%g/width=%d", mu, k, width), func(t *testing.T) {
					var tested, above int
					for range 10 {
						sr := newSearcher(flatScan(t, 2000, mu, rng))
						sr.half, sr.h = (width-1)/2, max(3*width, 10)
						sr.run(k, width)
						for _, z := range sr.z {
							tested++
							if z >= k {
								above++
							}
						}
					}
					q := FalseAlarmPerPoint(k)
					// Neighbouring windows overlap, so exceedances come in clumps of up to `width` points: the
					// count's variance is at most width times the binomial one.
					limit := q*float64(tested) + 4*math.Sqrt(float64(width)*q*float64(tested))
					if float64(above) > limit {
						t.Errorf("%d of %d points at ≥ %gσ; Q(%g) = %.3g allows %.0f", above, tested, k, k, q, limit)
					}
					t.Logf("%d of %d points at ≥ %gσ (Q·N = %.1f)", above, tested, k, q*float64(tested))
				})
			}
		}
	}
}

// TestNoPeaksInBackground: at the default 5σ, 200 scans of 2000 background points (expected spurious peaks at
// most 200·2000·Q(5) ≈ 0.11) report none, and at 3σ the spurious peaks stay below N·Q(3) per scan.
func TestNoPeaksInBackground(t *testing.T) {
	rng := rand.New(rand.NewPCG(5, 6))
	var at5, at3 int
	const scans, n = 200, 2000
	for i := range scans {
		s := flatScan(t, n, []float64{0.3, 5, 50, 500}[i%4], rng)
		p5, err := FindPeaks(s, PeakOptions{FWHMDeg: 0.05})
		if err != nil {
			t.Fatal(err)
		}
		at5 += len(p5.Peaks) + len(p5.Notes)
		if i%4 == 0 {
			p3, err := FindPeaks(s, PeakOptions{Significance: 3, FWHMDeg: 0.05})
			if err != nil {
				t.Fatal(err)
			}
			at3 += len(p3.Peaks) + len(p3.Notes)
		}
	}
	if at5 > 0 {
		t.Errorf("%d spurious peaks at 5σ in %d background scans", at5, scans)
	}
	if bound := float64(scans/4*n) * FalseAlarmPerPoint(3); float64(at3) > bound {
		t.Errorf("%d spurious peaks at 3σ in %d scans, above the bound N·Q(3) = %.1f", at3, scans/4, bound)
	}
	t.Logf("spurious peaks: %d at 5σ, %d at 3σ", at5, at3)
}
