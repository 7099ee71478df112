package analysis

import (
	"math"
	"testing"

	"gonum.org/v1/gonum/diff/fd"
)

// TestProfiles checks each shape's defining properties by numerical integration and evaluation: the area is
// the integral, the value at centre ± FWHM/2 is half the height, and the analytic derivatives match gonum's
// finite differences.
func TestProfiles(t *testing.T) {
	for _, c := range []struct {
		shape Shape
		q     []float64
		// Lorentzian wings fall as 1/x²: the integral over ±reach misses 2·w/(π·2·reach) of the area.
		reach, areaTol float64
	}{
		{Gaussian, []float64{20, 0.1, 7}, 2, 1e-9},
		{Lorentzian, []float64{20, 0.1, 7}, 2000, 1e-4},
		{PseudoVoigt, []float64{20, 0.1, 7, 0.3}, 2000, 1e-4},
	} {
		t.Run(c.shape.String(), func(t *testing.T) {
			g := make([]float64, len(c.q))
			var sum float64
			const n = 2_000_000
			h := 2 * c.reach / n
			for i := range n + 1 {
				x := c.q[0] - c.reach + float64(i)*h
				wgt := 1.0
				if i == 0 || i == n {
					wgt = 0.5
				}
				sum += wgt * c.shape.profile(x, c.q, g)
			}
			sum *= h
			if math.Abs(sum-c.q[2]) > c.areaTol*c.q[2] {
				t.Errorf("integral %.9g, area %g", sum, c.q[2])
			}
			top := c.shape.height(c.q)
			for _, x := range []float64{c.q[0] - c.q[1]/2, c.q[0] + c.q[1]/2} {
				if v := c.shape.profile(x, c.q, g); math.Abs(v-top/2) > 1e-12*top {
					t.Errorf("value at %g is %.12g, half the height is %.12g", x, v, top/2)
				}
			}
			if r := c.q[2] / (top * c.q[1]); math.Abs(r-c.shape.areaPerHeightFWHM(0.3)) > 1e-12 {
				t.Errorf("area/(height·FWHM) = %.12g, areaPerHeightFWHM %.12g", r, c.shape.areaPerHeightFWHM(0.3))
			}
			for _, x := range []float64{19.93, 20, 20.04, 20.3} {
				c.shape.profile(x, c.q, g)
				num := fd.Gradient(nil, func(q []float64) float64 {
					return c.shape.profile(x, q, make([]float64, len(q)))
				}, c.q, &fd.Settings{Formula: fd.Central})
				for k := range g {
					if math.Abs(g[k]-num[k]) > 1e-5*(math.Abs(num[k])+1) {
						t.Errorf("x = %g: ∂/∂q%d analytic %.8g, numerical %.8g", x, k, g[k], num[k])
					}
				}
			}
		})
	}
}

func TestParseShape(t *testing.T) {
	for in, want := range map[string]Shape{"": Gaussian, "Gaussian": Gaussian, "lorentzian": Lorentzian,
		"pseudo-voigt": PseudoVoigt, "PSEUDO_VOIGT": PseudoVoigt} {
		if got, err := ParseShape(in); err != nil || got != want {
			t.Errorf("ParseShape(%q) = %v, %v; want %v", in, got, err, want)
		}
	}
	if _, err := ParseShape("triangle"); err == nil {
		t.Error("ParseShape accepted an unknown shape")
	}
}
