package xray

import (
	"errors"
	"math"
	"testing"
)

func TestPoissonRate(t *testing.T) {
	// Poisson: σ_N = √N, r = N/t, σ_r = √N/t (physics reference).
	r := PoissonRate(400, 10)
	if r.CPS != 40 || r.Err != 2 {
		t.Errorf("PoissonRate(400, 10 s) = %+v, want 40 ± 2 cps", r)
	}
	if r := PoissonRate(5, 0); r != (Rate{}) {
		t.Errorf("PoissonRate with zero time = %+v, want zero", r)
	}
}

func TestDeadTimeModels(t *testing.T) {
	// Knoll, Radiation Detection and Measurement, 4th ed., ch. 4: non-paralyzable m = n/(1 + nτ),
	// paralyzable m = n·e^(−nτ).
	const tau = 100e-6
	for _, c := range []struct {
		n, nonPar, par float64
	}{
		{1000, 1000 / 1.1, 1000 * math.Exp(-0.1)},
		{10000, 5000, 10000 / math.E},
		{50000, 50000 / 6.0, 50000 * math.Exp(-5)},
	} {
		if got := ObservedRate(c.n, tau, NonParalyzable); math.Abs(got-c.nonPar) > 1e-9*c.n {
			t.Errorf("non-paralyzable m(%g) = %g, want %g", c.n, got, c.nonPar)
		}
		if got := ObservedRate(c.n, tau, Paralyzable); math.Abs(got-c.par) > 1e-9*c.n {
			t.Errorf("paralyzable m(%g) = %g, want %g", c.n, got, c.par)
		}
	}
	if got := ObservedRate(1234, 0, Paralyzable); got != 1234 {
		t.Errorf("no dead time: m = %g, want n", got)
	}
}

func TestTrueRateInverts(t *testing.T) {
	// The correction inverts the model on the paralyzable lower branch, nτ < 1 (Knoll, 4th ed., ch. 4).
	const tau = 100e-6
	for _, model := range []DeadTimeModel{NonParalyzable, Paralyzable} {
		for _, n := range []float64{1, 100, 3000, 9000} {
			m := ObservedRate(n, tau, model)
			got, err := TrueRate(Rate{CPS: m, Err: 1}, tau, model)
			if err != nil || math.Abs(got.CPS-n) > 1e-6*n {
				t.Errorf("%v: TrueRate(m(%g)) = %g, %v", model, n, got.CPS, err)
			}
			// The error grows by dn/dm, which is 1/(dm/dn).
			h := 1e-3 * n
			dmdn := (ObservedRate(n+h, tau, model) - ObservedRate(n-h, tau, model)) / (2 * h)
			if math.Abs(got.Err*dmdn-1) > 1e-4 {
				t.Errorf("%v at n=%g: σ_n·dm/dn = %g, want 1", model, n, got.Err*dmdn)
			}
		}
	}
	if _, err := TrueRate(Rate{CPS: 10000}, tau, NonParalyzable); !errors.Is(err, ErrSaturated) {
		t.Errorf("non-paralyzable m = 1/τ: %v, want ErrSaturated", err)
	}
	if _, err := TrueRate(Rate{CPS: 4000}, tau, Paralyzable); !errors.Is(err, ErrSaturated) {
		t.Errorf("paralyzable m above 1/(eτ): %v, want ErrSaturated", err)
	}
}

func TestObservedCountMoments(t *testing.T) {
	const tau, secs = 100e-6, 100.0
	for _, x := range []float64{0.01, 0.1, 0.5, 1, 2} {
		n := x / tau
		// Mean: the dead-time models above (Knoll, 4th ed., ch. 4).
		// Variance/mean, renewal theory: non-paralyzable 1/(1 + nτ)² (Cox, Renewal Theory, 1962);
		// paralyzable 1 − 2nτ·e^(−nτ) (Müller, Nucl. Instrum. Methods 112, 47, 1973; from memory).
		for _, c := range []struct {
			model          DeadTimeModel
			mean, varRatio float64
		}{
			{NonParalyzable, ObservedRate(n, tau, NonParalyzable) * secs, 1 / ((1 + x) * (1 + x))},
			{Paralyzable, ObservedRate(n, tau, Paralyzable) * secs, 1 - 2*x*math.Exp(-x)},
		} {
			mean, v := ObservedCountMoments(n, tau, secs, c.model)
			if math.Abs(mean-c.mean) > 1e-9*c.mean {
				t.Errorf("%v nτ=%g: mean %g, want %g", c.model, x, mean, c.mean)
			}
			if math.Abs(v/mean-c.varRatio) > 1e-9 {
				t.Errorf("%v nτ=%g: variance/mean %g, want %g", c.model, x, v/mean, c.varRatio)
			}
		}
	}
	// Without dead time the counts are Poisson: variance = mean.
	if m, v := ObservedCountMoments(500, 0, 2, Paralyzable); m != 1000 || v != 1000 {
		t.Errorf("τ = 0: mean %g, variance %g, want 1000, 1000", m, v)
	}
}
