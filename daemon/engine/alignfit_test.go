package engine

import (
	"errors"
	"math"
	"math/rand/v2"
	"strings"
	"testing"
)

// synthetic samples f on [from, to] by step as rates counted for dwell seconds, with Poisson noise from a fixed
// seed (a self-consistency check of the fits: the centre put in must come out).
func synthetic(f func(x float64) float64, from, to, step, dwell float64, seed uint64) profile {
	rng := rand.New(rand.NewPCG(seed, 1))
	var p profile
	for x := from; x <= to+step/2; x += step {
		lambda := f(x) * dwell
		n := math.Max(0, math.Round(lambda+math.Sqrt(lambda)*rng.NormFloat64()))
		p.x = append(p.x, x)
		p.y = append(p.y, n/dwell)
		p.sigma = append(p.sigma, math.Max(math.Sqrt(n), 1)/dwell)
	}
	return p
}

func TestAlignmentFits(t *testing.T) {
	box := func(c, w, s, a, b float64) func(float64) float64 {
		return func(x float64) float64 { return b + a*(phi((x-c+w/2)/s)-phi((x-c-w/2)/s)) }
	}
	gaussian := func(c, s, a, b float64) func(float64) float64 {
		return func(x float64) float64 { return b + a*math.Exp(-(x-c)*(x-c)/(2*s*s)) }
	}
	cases := []struct {
		name   string
		fit    func(profile) (peakFit, error)
		data   profile
		centre float64
		fails  string
	}{
		{"direct beam", fitDirectBeam, synthetic(box(-0.52, 0.4, 0.04, 2000, 0.3), -1.1, 0.1, 0.02, 1, 1), -0.52, ""},
		{"narrow direct beam", fitDirectBeam, synthetic(box(0.013, 0.05, 0.02, 800, 1), -0.6, 0.6, 0.01, 1, 2), 0.013, ""},
		{"rocking curve", fitRockingCurve, synthetic(gaussian(50.3, 0.054, 400, 20), 50.0, 50.6, 0.01, 1, 3), 50.3, ""},
		{"nothing but background", fitRockingCurve, synthetic(gaussian(50.3, 0.054, 0, 20), 50.0, 50.6, 0.01, 1, 4), 0, "no peak"},
		{"beam beyond the scan", fitDirectBeam, synthetic(box(0.55, 0.4, 0.04, 2000, 0.3), -0.6, 0.6, 0.02, 1, 5), 0, "edge"},
		{"too few points", fitRockingCurve, synthetic(gaussian(1, 0.1, 100, 1), 0.9, 1.1, 0.1, 1, 6), 0, "need at least"},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			got, err := tc.fit(tc.data)
			if tc.fails != "" {
				if err == nil || !strings.Contains(err.Error(), tc.fails) {
					t.Fatalf("fit gave %+v, %v; want an error saying %q", got, err, tc.fails)
				}
				if tc.fails == "no peak" && !errors.Is(err, errNoPeak) {
					t.Errorf("error %v is not errNoPeak", err)
				}
				return
			}
			if err != nil {
				t.Fatal(err)
			}
			if !(got.Err > 0) || math.Abs(got.Centre-tc.centre) > 4*got.Err {
				t.Errorf("centre %.5f ± %.5f, put in %.5f", got.Centre, got.Err, tc.centre)
			}
		})
	}
}
