package sim

import (
	"context"
	"sync"
	"time"
)

// Clock is the simulator's sense of time. Simulated durations (dwell, motion, ramps, watchdog) pass through
// Sleep, so a test can run a 10 s dwell in 10 ms of wall time while the counts still reflect 10 s.
type Clock interface {
	// Now is the simulated time.
	Now() time.Time
	// Sleep waits for d of simulated time, or until ctx ends.
	Sleep(ctx context.Context, d time.Duration) error
}

// ScaledClock runs simulated time at speed times wall time. Speed 1 is real time.
type ScaledClock struct {
	speed float64
	mu    sync.Mutex
	// wall and simulated time at the reference instant.
	wall0 time.Time
	sim0  time.Time
}

// NewScaledClock returns a clock that advances speed simulated seconds per wall second; speed must be > 0.
func NewScaledClock(speed float64) *ScaledClock {
	now := time.Now()
	return &ScaledClock{speed: speed, wall0: now, sim0: now}
}

// Speed is the simulated seconds per wall second.
func (c *ScaledClock) Speed() float64 { return c.speed }

// Now returns the simulated time.
func (c *ScaledClock) Now() time.Time {
	c.mu.Lock()
	defer c.mu.Unlock()
	return c.sim0.Add(time.Duration(float64(time.Since(c.wall0)) * c.speed))
}

// Sleep waits d/speed of wall time.
func (c *ScaledClock) Sleep(ctx context.Context, d time.Duration) error {
	if d <= 0 {
		return ctx.Err()
	}
	wall := time.Duration(float64(d) / c.speed)
	if wall <= 0 {
		return ctx.Err()
	}
	t := time.NewTimer(wall)
	defer t.Stop()
	select {
	case <-ctx.Done():
		return ctx.Err()
	case <-t.C:
		return nil
	}
}
