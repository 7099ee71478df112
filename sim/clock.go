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

// hostNow is the time on the host's side of the link, by which its silence is measured: wall time, since a
// fast simulation must not turn a 2 ms pause of the host into a 20 s silence.
func (c *ScaledClock) hostNow() time.Time { return time.Now() }

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

// ManualClock is simulated time that moves only when told: Sleep advances it by d at once, Advance moves it
// on. Tests use it to run long dwells, ramps and watchdog times in no wall time, exactly.
type ManualClock struct {
	mu  sync.Mutex
	now time.Time
}

// NewManualClock returns a clock standing at start.
func NewManualClock(start time.Time) *ManualClock { return &ManualClock{now: start} }

// Now returns the simulated time.
func (c *ManualClock) Now() time.Time {
	c.mu.Lock()
	defer c.mu.Unlock()
	return c.now
}

// Sleep advances the clock by d and returns at once, unless ctx has already ended.
func (c *ManualClock) Sleep(ctx context.Context, d time.Duration) error {
	if err := ctx.Err(); err != nil {
		return err
	}
	c.Advance(d)
	return nil
}

// hostNow is the host's time: with no wall clock behind it, the manual clock's own time.
func (c *ManualClock) hostNow() time.Time { return c.Now() }

// Advance moves the clock on by d (ignored when d ≤ 0).
func (c *ManualClock) Advance(d time.Duration) {
	if d <= 0 {
		return
	}
	c.mu.Lock()
	defer c.mu.Unlock()
	c.now = c.now.Add(d)
}
