package analysis

import (
	"errors"
	"math"
	"math/rand/v2"
	"testing"
)

// TestMeasureWidth: a rocking curve (Gaussian, FWHM 0.08°, on a flat background) is measured by fit and by
// interpolation; noise-free both give the true width (interpolation within its linear-interpolation error),
// and over many noisy curves the scatter of each matches its reported error.
func TestMeasureWidth(t *testing.T) {
	sy := synth{from: 21.9, to: 23.1, step: 0.005, dwell: 1, bg0: 10, lines: []synthLine{{22.5, 0.08, 30}}}
	w, err := MeasureWidth(sy.scan(t, nil), PeakOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if math.Abs(w.FWHMFit.Value-0.08) > 1e-6 || math.Abs(w.FWHMInterp.Value-0.08) > 1e-3 || w.Found != 1 {
		t.Errorf("noise-free: fit %.6f, interpolated %.6f, want 0.08", w.FWHMFit.Value, w.FWHMInterp.Value)
	}
	rng := rand.New(rand.NewPCG(61, 62))
	const runs = 200
	var fs, fs2, fe, is, is2, ie float64
	for range runs {
		w, err := MeasureWidth(sy.scan(t, rng), PeakOptions{})
		if err != nil {
			t.Fatal(err)
		}
		fs, fs2, fe = fs+w.FWHMFit.Value, fs2+w.FWHMFit.Value*w.FWHMFit.Value, fe+w.FWHMFit.Err
		is, is2, ie = is+w.FWHMInterp.Value, is2+w.FWHMInterp.Value*w.FWHMInterp.Value, ie+w.FWHMInterp.Err
	}
	for _, c := range []struct {
		name          string
		s, s2, e, tol float64
	}{{"fit", fs, fs2, fe, 0.25}, {"interpolated", is, is2, ie, 0.35}} {
		mean := c.s / runs
		sd := math.Sqrt(c.s2/runs - mean*mean)
		if r := sd / (c.e / runs); math.Abs(r-1) > c.tol {
			t.Errorf("%s: scatter %.3g vs reported %.3g (ratio %.2f)", c.name, sd, c.e/runs, r)
		}
		if math.Abs(mean-0.08) > 0.05*0.08 {
			t.Errorf("%s: mean width %.5f, truth 0.08", c.name, mean)
		}
		t.Logf("%s: mean %.5f scatter %.3g reported %.3g", c.name, mean, sd, c.e/runs)
	}
}

func TestMeasureWidthNeedsAPeak(t *testing.T) {
	if _, err := MeasureWidth(flatScan(t, 300, 20, rand.New(rand.NewPCG(1, 1))), PeakOptions{}); !errors.Is(err, ErrNoPeak) {
		t.Errorf("flat scan: err = %v, want ErrNoPeak", err)
	}
}
