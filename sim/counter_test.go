package sim

import (
	"fmt"
	"math"
	"math/rand/v2"
	"testing"
	"time"

	"goniod/xray"
)

func TestGeigerStatistics(t *testing.T) {
	// Recorded counts of Poisson events through a dead time: mean by the dead-time models (Knoll, 4th ed.,
	// ch. 4), variance/mean 1/(1 + nτ)² non-paralyzable, 1 − 2nτe^(−nτ) paralyzable (renewal theory, Cox,
	// Renewal Theory, 1962; Müller, NIM 112, 47, 1973, from memory). 2000 gates, fixed seed. Tolerances: 4σ of
	// the sample mean, and 4·√(2/(N−1)) = 0.13 relative on the sample variance.
	const tau, gates = 100e-6, 2000
	for _, model := range []xray.DeadTimeModel{xray.NonParalyzable, xray.Paralyzable} {
		for _, c := range []struct {
			rate, seconds float64
		}{{50, 1}, {3000, 0.5}, {20000, 0.1}, {30000, 10}} {
			t.Run(fmt.Sprintf("%v/%gcps/%gs", model, c.rate, c.seconds), func(t *testing.T) {
				g := geiger{tau: tau, model: model}
				rng := rand.New(rand.NewPCG(42, 1))
				xs := make([]float64, gates)
				for i := range xs {
					xs[i] = float64(g.count(rng, []rateSegment{{seconds: c.seconds, rate: c.rate}}))
				}
				mean, v := meanVar(xs)
				wantMean, wantVar := xray.ObservedCountMoments(c.rate, tau, c.seconds, model)
				if math.Abs(mean-wantMean) > 4*math.Sqrt(wantVar/gates) {
					t.Errorf("mean %.2f, want %.2f ± %.2f", mean, wantMean, math.Sqrt(wantVar/gates))
				}
				if math.Abs(v/wantVar-1) > 4*math.Sqrt(2.0/(gates-1)) {
					t.Errorf("variance %.1f, want %.1f (variance/mean %.3f, want %.3f)", v, wantVar, v/mean, wantVar/wantMean)
				}
			})
		}
	}
}

func TestGeigerSegmentsJoin(t *testing.T) {
	// A gate cut into pieces of equal rate counts like the whole gate: the dead time carries across pieces.
	g := geiger{tau: 100e-6}
	const gates = 1000
	whole, cut := make([]float64, gates), make([]float64, gates)
	rng := rand.New(rand.NewPCG(7, 7))
	for i := range whole {
		whole[i] = float64(g.count(rng, []rateSegment{{1, 8000}}))
		cut[i] = float64(g.count(rng, []rateSegment{{0.25, 8000}, {0.25, 8000}, {0.5, 8000}}))
	}
	mw, vw := meanVar(whole)
	mc, _ := meanVar(cut)
	if math.Abs(mw-mc) > 4*math.Sqrt(2*vw/gates) {
		t.Errorf("whole gate mean %.1f, cut gate %.1f", mw, mc)
	}
}

func TestDeadTimeCurve(t *testing.T) {
	// Observed against true rate at the first-order Cu Kα peak, the true rate raised with the unit's brightness:
	// the observed rate follows m = n/(1 + nτ) or m = n·e^(−nτ) (Knoll, 4th ed., ch. 4) within 4σ.
	th := braggDeg(t, "Cu", "Kα1", "LiF", 1)
	for _, paralyzable := range []bool{false, true} {
		model := xray.NonParalyzable
		if paralyzable {
			model = xray.Paralyzable
		}
		for _, scale := range []float64{0.04, 0.4, 1, 2, 4} {
			b := newBench(t, Config{IntensityScale: scale, Paralyzable: paralyzable, Seed: 21}, 30, 1)
			const gate = 20 * time.Second
			observed := b.rateAt(th, 2*th, gate)
			n := b.in.model.rate(th, 2*th, 30, 1)
			tau := b.in.cfg.DeadTime.Seconds()
			want := xray.ObservedRate(n, tau, model)
			_, v := xray.ObservedCountMoments(n, tau, gate.Seconds(), model)
			sigma := math.Sqrt(v) / gate.Seconds()
			t.Logf("%v: true %7.0f cps, observed %7.1f cps, model %7.1f ± %.1f, m/n %.3f", model, n, observed, want, sigma, observed/n)
			if math.Abs(observed-want) > 4*sigma {
				t.Errorf("%v at true %.0f cps: observed %.1f cps, want %.1f ± %.1f", model, n, observed, want, sigma)
			}
		}
	}
}

func TestRepeatedCountsVariance(t *testing.T) {
	// Repeated counts at a fixed position, fixed seed, 2000 gates of 1 s. In the continuum (about 30 cps) the
	// dead time hardly matters and the variance equals the mean (Poisson); at the Kα peak (about 2,500 cps
	// true) it is 1/(1 + nτ)² of the mean (renewal theory, Cox 1962), well below both the Poisson value and the
	// 1/(1 + nτ) a merely rescaled Poisson count would give. Tolerance 4·√(2/(N−1)) = 0.13 relative.
	ka := braggDeg(t, "Cu", "Kα1", "LiF", 1)
	for _, th := range []float64{30, ka} {
		b := newBench(t, Config{Seed: 17}, 30, 1)
		b.at(th, 2*th)
		const gates = 2000
		xs := make([]float64, gates)
		for i := range xs {
			xs[i] = b.count(time.Second)
		}
		mean, v := meanVar(xs)
		nt := b.in.model.rate(th, 2*th, 30, 1) * b.in.cfg.DeadTime.Seconds()
		want := 1 / ((1 + nt) * (1 + nt))
		t.Logf("θ %.3f°: mean %.1f, variance/mean %.3f, want %.3f (nτ = %.3f)", th, mean, v/mean, want, nt)
		if math.Abs(v/mean/want-1) > 4*math.Sqrt(2.0/(gates-1)) {
			t.Errorf("θ %.3f°: variance/mean %.3f, want %.3f", th, v/mean, want)
		}
	}
}
