package analysis

import (
	"math"

	"gonum.org/v1/gonum/mathext"
	"gonum.org/v1/gonum/stat/distuv"
)

// onOffZ is the significance, in standard deviations of a one-sided Gaussian test, of nOn counts where the
// background predicts b counts, the background itself having been measured with 1/alpha times the exposure
// (alpha = on-exposure/off-exposure). It uses the conditional binomial test of two Poisson counts, exact
// for a flat background (Przyborowski & Wilenski, Biometrika 31, 313, 1940): given nOn + nOff counts in
// all, nOn is binomial with p = alpha/(1 + alpha). Being discrete, the test is conservative: the chance of
// z ≥ k from background alone is at most the Gaussian tail Q(k). Far in the tail, where the binomial tail
// underflows, it uses the likelihood-ratio significance of Li & Ma (ApJ 272, 317, 1983, eq. 17).
func onOffZ(nOn, b, alpha float64) float64 {
	if !(nOn > b) || nOn <= 0 {
		return 0
	}
	b = math.Max(b, 0)
	nOff := b / alpha
	p := alpha / (1 + alpha)
	pval := mathext.RegIncBeta(nOn, nOff+1, p)
	if pval > 1e-15 && !math.IsNaN(pval) {
		return -distuv.UnitNormal.Quantile(pval)
	}
	n := nOn + nOff
	s := nOn * math.Log((1+alpha)/alpha*nOn/n)
	if nOff > 0 {
		s += nOff * math.Log((1+alpha)*nOff/n)
	}
	return math.Sqrt(2 * math.Max(s, 0))
}

// gaussZ is the quick Gaussian approximation of onOffZ, used to skip the exact test where it cannot reach a
// threshold: the Poisson upper tail is heavier than the Gaussian one, so the exact z is not larger.
func gaussZ(nOn, b, alpha float64) float64 {
	if b <= 0 {
		return math.Inf(1)
	}
	return (nOn - b) / math.Sqrt(b*(1+alpha))
}

// FalseAlarmPerPoint is the chance that background alone lifts one tested point to a significance of at least
// k standard deviations: the one-sided Gaussian tail Q(k). The expected number of spurious peaks in a scan of
// N points is at most N·Q(k) (each reported peak needs at least one point at or above k).
func FalseAlarmPerPoint(k float64) float64 { return distuv.UnitNormal.Survival(k) }
