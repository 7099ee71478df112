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
