package analysis

import (
	"math/rand/v2"
	"testing"
)

func TestDebugEdge(t *testing.T) {
	truth := synthLine{centre: 22.4968, fwhm: 0.08, area: 40}
	sy := synth{from: 22.1, to: 22.9, step: 0.01, dwell: 1, bg0: 5, lines: []synthLine{truth}}
	rng := rand.New(rand.NewPCG(21, 22))
	for run := 0; run < 300; run++ {
		s := sy.scan(t, rng)
		cs, sr, fw := search(s, 5, 0)
		if len(cs) == 1 {
			continue
		}
		t.Log(run, fw, sr.half, sr.h, cs)
		for i := 0; i < s.Len(); i++ {
			t.Logf("%d %.2f N=%v z=%.2f bg=%.2f mask=%v", i, s.X[i], s.Counts[i], sr.z[i], sr.bg[i], sr.mask[i])
		}
		break
	}
}

func TestDebugScale(t *testing.T) {
	s := cuOnLiF(42, 52, 0.01).scan(t, rand.New(rand.NewPCG(2, 2)))
	c := make([]float64, s.Len())
	for i := range c {
		c[i] = 100 * s.Counts[i]
	}
	scaled, _ := NewScan(s.X, c, s.Dwell, s.DeadTime)
	cs, sr, fw := search(scaled, 5, 0)
	t.Log(fw, sr.half, sr.h, cs)
	res, _ := FindPeaks(scaled, PeakOptions{})
	t.Logf("%+v", res)
}
