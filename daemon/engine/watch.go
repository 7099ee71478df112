package engine

import (
	"context"

	"goniod/daemon/scan"
	goniodv1 "goniod/proto/goniod/v1"
)

// Event is one item of a watch: a point, or a record after a state change; End marks the last.
type Event struct {
	Point  *goniodv1.Point
	Record *scan.Record
	End    bool
}

// Batches of a watch: points taken from memory at once, and points read from the store at once.
const (
	watchMemoryBatch = 256
	watchStoreBatch  = 4096
)

// Watch sends the scan's record, then every durable point from index from (replayed from the store, then
// live), each state change in its place among the points, until the scan ends (the final record, marked End)
// or ctx ends. Every point is sent once, in order. send runs on the caller's goroutine; a slow send slows
// only this watch, never the scan.
func (e *Engine) Watch(ctx context.Context, id string, from int, send func(Event) error) error {
	en, err := e.lookup(id)
	if err != nil {
		return err
	}
	h, err := e.warm(en)
	if err != nil {
		return err
	}
	h.watching(1)
	defer func() { h.watching(-1); en.cool(h) }()
	w := &watch{e: e, id: id, h: h, cursor: max(from, 0), send: send}
	rec, version := h.snapshot() // the present record; earlier changes are not replayed
	w.seen = version
	if err := send(Event{Record: &rec}); err != nil {
		return err
	}
	for {
		done, err := w.step(ctx)
		if done || err != nil {
			return err
		}
	}
}

// watch is one watcher's position: the next point to send and the last state version sent.
type watch struct {
	e      *Engine
	id     string
	h      *hub
	cursor int
	seen   uint64
	send   func(Event) error
	buf    []*goniodv1.Point
}

// step sends what is ready (a state change, points from memory or from the store) or waits for more. It
// returns done after the End event.
func (w *watch) step(ctx context.Context) (done bool, err error) {
	v := w.h.look(w.cursor, watchMemoryBatch, w.seen, w.buf)
	w.buf = v.points
	upto := v.durable // points before the next state change go first
	if len(v.changes) > 0 {
		c := v.changes[0]
		if w.cursor >= c.durable {
			w.seen = c.version
			rec := c.rec
			end := rec.State.Terminal()
			return end, w.send(Event{Record: &rec, End: end})
		}
		upto = c.durable
	}
	switch {
	case len(v.points) > 0:
		for _, p := range v.points[:min(len(v.points), upto-w.cursor)] {
			if err := w.send(Event{Point: p}); err != nil {
				return false, err
			}
			w.cursor++
		}
		clear(v.points)
		if w.cursor < v.durable || len(v.changes) > 0 {
			return false, nil
		}
		// Caught up with what this look saw: anything newer has closed v.changed already.
	case w.cursor < upto:
		// Behind the in-memory ring: catch up from the store in bounded chunks.
		return false, w.e.store.ReadPoints(ctx, w.id, w.cursor, min(upto-w.cursor, watchStoreBatch), func(p *goniodv1.Point) error {
			w.cursor++
			return w.send(Event{Point: p})
		})
	case v.ended:
		// Ended before the watch began (no change left to see): the record is the end.
		rec := w.h.record()
		return true, w.send(Event{Record: &rec, End: true})
	}
	select {
	case <-ctx.Done():
		return false, ctx.Err()
	case <-v.changed:
		return false, nil
	}
}
