package engine

import (
	"errors"
	"fmt"

	"goniod/daemon/scan"
)

// ErrStorage marks a failure of the data directory (disk full, read-only, removed).
var ErrStorage = errors.New("data directory")

// setState changes a scan's record: in memory at once (the running daemon's truth, so that a scan whose
// record cannot be saved still stops and holds the queue), then on disk. A failed save is returned; after a
// restart the older record on disk applies.
func (e *Engine) setState(en *entry, mutate func(*scan.Record)) (scan.Record, error) {
	en.saveMu.Lock()
	defer en.saveMu.Unlock()
	h := en.live()
	rec := h.record()
	mutate(&rec)
	h.setRecord(rec)
	if rec.State.Terminal() {
		e.mu.Lock()
		e.retireLocked(en, rec.State)
		e.mu.Unlock()
	}
	e.obs.StateChanged(&rec)
	if err := e.store.SaveRecord(&rec); err != nil {
		return rec, fmt.Errorf("%w: %w", ErrStorage, err)
	}
	en.cool(h) // only once the record on disk is the truth
	return rec, nil
}

// Pause asks a running scan to stop after its current point (high voltage goes off; resume continues it).
// A queued scan is held at once: it waits for a release.
func (e *Engine) Pause(id string) (scan.Record, error) {
	return e.operate(id, "pause", func(en *entry) { en.pauseReq = true }, func(r *scan.Record) {
		r.State, r.Reason = scan.Held, "held by an operator; release to run"
	})
}

// Cancel cancels a scan: at once when it is not running, after the current point when it is.
func (e *Engine) Cancel(id string) (scan.Record, error) {
	return e.operate(id, "cancel", func(en *entry) { en.cancelReq = true }, func(r *scan.Record) {
		r.State, r.Reason, r.Ended = scan.Cancelled, "cancelled by an operator", e.now().UTC()
	})
}

// Resume puts a paused or interrupted scan back into the queue; it continues from its next point.
func (e *Engine) Resume(id string) (scan.Record, error) {
	return e.operate(id, "resume", nil, requeue("resumed by an operator"))
}

// Release lets a held scan run.
func (e *Engine) Release(id string) (scan.Record, error) {
	return e.operate(id, "release", nil, requeue("released by an operator"))
}

func requeue(reason string) func(*scan.Record) {
	return func(r *scan.Record) { r.State, r.Reason = scan.Queued, reason }
}

// operate applies an operator's op to a scan. The scan the runner has taken (running, or about to) gets a
// flag that the runner reads between points; any other scan changes at once. The check and the change
// happen under the engine's lock, so the queue never starts a scan that is being cancelled or held.
func (e *Engine) operate(id, op string, flag func(*entry), apply func(*scan.Record)) (scan.Record, error) {
	en, err := e.lookup(id)
	if err != nil {
		return scan.Record{}, err
	}
	en.saveMu.Lock()
	defer en.saveMu.Unlock()
	e.mu.Lock()
	if err := scan.Allow(op, en.state()); err != nil {
		e.mu.Unlock()
		rec, rerr := e.record(en)
		if rerr != nil {
			return rec, rerr
		}
		return rec, err
	}
	h := en.live() // a scan that may still change is never cold
	rec := h.record()
	if flag != nil && e.running == en && (rec.State == scan.Running || rec.State == scan.Queued) {
		flag(en)
		e.mu.Unlock()
		e.log.Info(op+" requested; the scan stops after its current point", "scan", id)
		return rec, nil
	}
	apply(&rec)
	en.pauseReq, en.cancelReq = false, false
	h.setRecord(rec)
	if rec.State.Terminal() {
		e.retireLocked(en, rec.State)
	}
	e.mu.Unlock()
	e.obs.StateChanged(&rec)
	e.log.Info("scan "+string(rec.State), "scan", id, "op", op)
	e.signal()
	if err := e.store.SaveRecord(&rec); err != nil {
		return rec, fmt.Errorf("%w: %w", ErrStorage, err)
	}
	en.cool(h)
	return rec, nil
}
