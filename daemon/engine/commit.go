package engine

import (
	"fmt"
	"sync"
	"time"

	"goniod/daemon/store"
	goniodv1 "goniod/proto/goniod/v1"
)

// Group commit bounds: how many taken points may wait for their fsync, and how many one write takes at most.
// A point that waits is not yet published, so a crash loses at most these, and none that anyone has seen; a
// resume takes them again.
const (
	commitQueue = 512
	commitBatch = 1024
)

// taken is a point that has been measured and waits to be made durable.
type taken struct {
	p *goniodv1.Point
	// overhead is the runner's time for the point outside the instrument.
	overhead time.Duration
}

// committer makes a scan's points durable in batches (group commit) and publishes each batch once it is on disk.
// The runner hands it points in order and goes on measuring while earlier points are fsynced; when the disk is
// the slower part, one fsync covers every point that arrived meanwhile. It owns the appender while it runs.
type committer struct {
	app     *store.Appender
	hub     *hub
	durable func(points []*goniodv1.Point, at time.Time) // called when a batch is on disk, before it is published
	stored  func(batch []taken)                          // called after each durable batch is published

	in   chan taken
	done chan struct{}

	mu     sync.Mutex
	err    error // the first storage failure; later points are refused
	failed int   // index of the first point that could not be stored
}

func startCommitter(app *store.Appender, h *hub, durable func([]*goniodv1.Point, time.Time), stored func([]taken)) *committer {
	c := &committer{app: app, hub: h, durable: durable, stored: stored, in: make(chan taken, commitQueue), done: make(chan struct{})}
	go c.loop()
	return c
}

// take queues a point; it blocks while commitQueue points wait. It returns the storage failure, if one has
// happened, so the runner stops taking points.
func (c *committer) take(t taken) error {
	if err := c.failure(); err != nil {
		return err
	}
	c.in <- t
	return nil
}

// failure is the first storage error, wrapped with the point it hit.
func (c *committer) failure() error {
	c.mu.Lock()
	defer c.mu.Unlock()
	if c.err == nil {
		return nil
	}
	return fmt.Errorf("storing point %d failed (the %d points before it are intact): %w", c.failed, c.failed, c.err)
}

// close stores what waits, stops the committer and returns the storage failure, if any.
func (c *committer) close() error {
	close(c.in)
	<-c.done
	return c.failure()
}

func (c *committer) loop() {
	defer close(c.done)
	batch := make([]taken, 0, commitBatch)
	points := make([]*goniodv1.Point, 0, commitBatch)
	for t := range c.in {
		batch = append(batch[:0], t)
	gather:
		for len(batch) < commitBatch {
			select {
			case t, ok := <-c.in:
				if !ok {
					break gather
				}
				batch = append(batch, t)
			default:
				break gather
			}
		}
		c.mu.Lock()
		failed := c.err != nil
		c.mu.Unlock()
		if failed {
			continue // drain: nothing after a failure is stored
		}
		points = points[:0]
		for _, t := range batch {
			points = append(points, t.p)
		}
		if err := c.app.Append(points...); err != nil {
			c.mu.Lock()
			c.err, c.failed = err, int(points[0].Index)
			c.mu.Unlock()
			continue
		}
		if c.durable != nil {
			c.durable(points, time.Now())
		}
		c.hub.publish(points...)
		c.stored(batch)
	}
}
