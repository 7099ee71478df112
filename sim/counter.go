package sim

import (
	"math"
	"math/rand/v2"

	"goniod/xray"
)

// geiger is the Geiger–Müller counter: Poisson events at the true rate, of which those arriving while the tube
// is dead after an earlier event are lost. The loss is simulated event by event, so the recorded counts have
// the right distribution (variance below the mean), not merely the right mean.
type geiger struct {
	tau   float64 // dead time, seconds
	model xray.DeadTimeModel
}

// rateSegment is a stretch of a gate with constant true rate.
type rateSegment struct {
	seconds, rate float64
}

// exactEvents is the most events per segment simulated one by one; above it the recorded count is drawn from
// the renewal-theory normal limit (xray.ObservedCountMoments), which such large counts follow closely.
const exactEvents = 200_000

// count returns the recorded counts over consecutive segments. The counter starts live.
func (g geiger) count(rng *rand.Rand, segs []rateSegment) uint64 {
	var n uint64
	t, dead := 0.0, math.Inf(-1) // dead: the counter is dead until this time
	for _, s := range segs {
		end := t + s.seconds
		switch {
		case s.rate <= 0 || s.seconds <= 0:
		case s.rate*s.seconds > exactEvents:
			mean, v := xray.ObservedCountMoments(s.rate, g.tau, s.seconds, g.model)
			if k := math.Round(mean + math.Sqrt(v)*rng.NormFloat64()); k > 0 {
				n += uint64(k)
			}
			dead = math.Inf(-1)
		case g.model == xray.Paralyzable:
			// Every event, recorded or not, restarts the dead time.
			for next := t + rng.ExpFloat64()/s.rate; next < end; next += rng.ExpFloat64() / s.rate {
				if next >= dead {
					n++
				}
				dead = next + g.tau
			}
		default:
			// Non-paralyzable: after a recorded event the counter is dead for τ; by memorylessness the next
			// recorded event comes an exponential time after it recovers.
			for {
				next := math.Max(t, dead) + rng.ExpFloat64()/s.rate
				if next >= end {
					break
				}
				n++
				t, dead = next, next+g.tau
			}
		}
		t = end
	}
	return n
}
