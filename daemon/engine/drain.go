package engine

import (
	"context"
	"time"
)

// drainPoll is how often Drain looks whether the running scan has stopped.
const drainPoll = 5 * time.Millisecond

// Drain prepares a shutdown: the running scan stops after its current point (interrupted, every durable point
// kept, high voltage off) and no queued scan starts. It returns when no scan runs, or with ctx's error when ctx
// ends first; the caller then cancels Run's context, which cuts the point in progress short.
func (e *Engine) Drain(ctx context.Context) error {
	e.mu.Lock()
	e.draining = true
	e.mu.Unlock()
	t := time.NewTicker(drainPoll)
	defer t.Stop()
	for {
		e.mu.Lock()
		idle := e.running == nil
		e.mu.Unlock()
		if idle {
			return nil
		}
		select {
		case <-ctx.Done():
			return ctx.Err()
		case <-t.C:
		}
	}
}
