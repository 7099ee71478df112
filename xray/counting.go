package xray

import (
	"fmt"
	"math"
)

// Rate is a count rate with its standard error, counts per second.
type Rate struct {
	CPS, Err float64
}

// PoissonRate is N/t with σ = √N/t (Poisson statistics). t in seconds must be positive.
func PoissonRate(counts uint64, seconds float64) Rate {
	if seconds <= 0 {
		return Rate{}
	}
	n := float64(counts)
	return Rate{CPS: n / seconds, Err: math.Sqrt(n) / seconds}
}

// DeadTimeModel says how a counter loses events after each recorded one.
type DeadTimeModel int

const (
	// NonParalyzable: events during the dead time are lost but do not extend it (Knoll, 4th ed., ch. 4).
	NonParalyzable DeadTimeModel = iota
	// Paralyzable: every event, recorded or not, restarts the dead time.
	Paralyzable
)

func (m DeadTimeModel) String() string {
	if m == Paralyzable {
		return "paralyzable"
	}
	return "non-paralyzable"
}

// ObservedRate is the recorded rate m for a true rate n and dead time tau (seconds):
// non-paralyzable m = n/(1+nτ), paralyzable m = n·e^(−nτ) (Knoll, 4th ed., ch. 4).
func ObservedRate(trueRate, tau float64, model DeadTimeModel) float64 {
	if tau <= 0 {
		return trueRate
	}
	if model == Paralyzable {
		return trueRate * math.Exp(-trueRate*tau)
	}
	return trueRate / (1 + trueRate*tau)
}

// ErrSaturated is returned when an observed rate is beyond what the dead-time model can record.
var ErrSaturated = fmt.Errorf("observed rate at or beyond the counter's saturation")

// TrueRate inverts the dead-time model: the true rate n for an observed rate m (both with standard errors).
// Non-paralyzable: n = m/(1 − mτ), dn/dm = 1/(1 − mτ)². Paralyzable: the lower root of m = n·e^(−nτ)
// (Newton's method), dn/dm = e^(nτ)/(1 − nτ). The error is propagated to first order.
func TrueRate(observed Rate, tau float64, model DeadTimeModel) (Rate, error) {
	m := observed.CPS
	if tau <= 0 || m <= 0 {
		return observed, nil
	}
	if model == Paralyzable {
		if m*tau >= 1/math.E {
			return Rate{}, ErrSaturated
		}
		n := m
		for i := 0; i < 100; i++ {
			f := n*math.Exp(-n*tau) - m
			df := math.Exp(-n*tau) * (1 - n*tau)
			step := f / df
			n -= step
			if math.Abs(step) < 1e-12*n {
				break
			}
		}
		return Rate{CPS: n, Err: observed.Err * math.Exp(n*tau) / (1 - n*tau)}, nil
	}
	loss := 1 - m*tau
	if loss <= 0 {
		return Rate{}, ErrSaturated
	}
	return Rate{CPS: m / loss, Err: observed.Err / (loss * loss)}, nil
}

// ObservedCountMoments is the mean and variance of the number of counts a counter with dead time tau
// (seconds) records in t seconds from Poisson events at trueRate, for long gates (many counts): the
// recorded events form a renewal process, so mean = t/μ and variance = t·σ²/μ³, with μ and σ² the mean and
// variance of the interval between recorded events (Cox, Renewal Theory, 1962, ch. 6). Non-paralyzable:
// μ = τ + 1/n, σ² = 1/n², so variance/mean = 1/(1 + nτ)². Paralyzable: an interval is a run of gaps shorter
// than τ closed by one longer gap, μ = e^(nτ)/n.
func ObservedCountMoments(trueRate, tau, t float64, model DeadTimeModel) (mean, variance float64) {
	n := trueRate
	if n <= 0 || t <= 0 {
		return 0, 0
	}
	if tau <= 0 {
		return n * t, n * t
	}
	var mu, s2 float64
	if model == Paralyzable {
		mu, s2 = paralyzableInterval(n, tau)
	} else {
		mu, s2 = tau+1/n, 1/(n*n)
	}
	return t / mu, t * s2 / (mu * mu * mu)
}

// paralyzableInterval is the mean and variance of the interval between recorded events of a paralyzable
// counter. With gaps G ~ Exp(n) and p = P(G > τ) = e^(−nτ): the interval is J gaps S shorter than τ
// (J geometric, mean (1−p)/p, variance (1−p)/p²) and one gap L = τ + Exp(n).
func paralyzableInterval(n, tau float64) (mean, variance float64) {
	x := n * tau
	em1 := math.Expm1(x) // p/(1−p) = 1/(e^x − 1)
	if em1 < 1e-9 {
		return 1 / n, 1 / (n * n)
	}
	p := math.Exp(-x)
	eS := 1/n - tau/em1
	eS2 := 2/(n*n) - (tau*tau+2*tau/n)/em1
	varS := math.Max(eS2-eS*eS, 0)
	eJ, varJ := (1-p)/p, (1-p)/(p*p)
	return eJ*eS + tau + 1/n, eJ*varS + varJ*eS*eS + 1/(n*n)
}
