package engine

import (
	"sync"
	"sync/atomic"
	"time"

	"goniod/daemon/scan"
	goniodv1 "goniod/proto/goniod/v1"
)

// ringSize is how many recent points a hub keeps in memory for live watchers; a watcher further behind
// reads from the store. It bounds memory per running scan whatever the number or speed of watchers.
const ringSize = 4096

// historySize is how many state changes a hub keeps, so that a watcher that was busy still sees each change
// in its place among the points; one further behind sees the latest changes only.
const historySize = 64

// wakeInterval is the shortest time between two wake-ups of the watchers for new points: the first point after
// a quiet spell wakes them at once, later ones are gathered for at most this long. At high point rates this
// spares each watcher a wake-up per point, which with many watchers would take the processor from the scan.
const wakeInterval = 2 * time.Millisecond

// hub publishes one scan's durable points and state changes to any number of watchers. The publisher never
// waits for a watcher: watchers read new points without a lock (atomics only), each at its own pace, and wake
// on a channel that is closed when there is something new. Writers (the runner, state changes) share a mutex
// that watchers take only to read state changes.
type hub struct {
	durable atomic.Int64                  // points [0, durable) are on disk
	ring    atomic.Pointer[ring]          // recent points; nil while the scan does not run
	version atomic.Uint64                 // bumped at every state change
	ended   atomic.Bool                   // the scan reached a terminal state
	changed atomic.Pointer[chan struct{}] // closed and replaced when watchers should look again

	mu       sync.Mutex
	rec      scan.Record
	history  []change // the latest state changes, oldest first
	watchers int      // watches in progress
	// wake-up pacing (see wakeInterval)
	lastWake    time.Time
	wakePending bool
}

// ring holds recent points by index % ringSize.
type ring [ringSize]atomic.Pointer[goniodv1.Point]

// change is a state change and how many points were durable when it happened.
type change struct {
	version uint64
	durable int
	rec     scan.Record
}

func newHub(rec scan.Record, durable int) *hub {
	h := &hub{rec: rec}
	h.durable.Store(int64(durable))
	h.ended.Store(rec.State.Terminal())
	ch := make(chan struct{})
	h.changed.Store(&ch)
	return h
}

// publish makes durable points visible; points must continue the sequence. The slots are written before the
// count, so a watcher that sees the count finds the points.
func (h *hub) publish(points ...*goniodv1.Point) {
	h.mu.Lock()
	defer h.mu.Unlock()
	r := h.ring.Load()
	if r == nil {
		r = new(ring)
		h.ring.Store(r)
	}
	for _, p := range points {
		r[int(p.Index)%ringSize].Store(p)
		h.durable.Store(int64(p.Index) + 1)
	}
	h.rec.PointsDone = int(h.durable.Load())
	if since := time.Since(h.lastWake); since >= wakeInterval {
		h.wakeLocked()
	} else if !h.wakePending {
		h.wakePending = true
		time.AfterFunc(wakeInterval-since, func() {
			h.mu.Lock()
			if h.wakePending {
				h.wakeLocked()
			}
			h.mu.Unlock()
		})
	}
}

// setRecord publishes a state change.
func (h *hub) setRecord(rec scan.Record) {
	h.mu.Lock()
	defer h.mu.Unlock()
	h.rec = rec
	if len(h.history) == historySize {
		h.history = append(h.history[:0], h.history[1:]...)
	}
	h.history = append(h.history, change{version: h.version.Load() + 1, durable: int(h.durable.Load()), rec: rec})
	h.version.Add(1)
	h.ended.Store(rec.State.Terminal())
	if rec.State.Terminal() || rec.State == scan.Queued || rec.State == scan.Held {
		h.ring.Store(nil) // not running: free the memory; watchers read the store
	}
	h.wakeLocked()
}

func (h *hub) wakeLocked() {
	ch := make(chan struct{})
	close(*h.changed.Swap(&ch))
	h.lastWake, h.wakePending = time.Now(), false
}

// view is what a watcher sees at one moment.
type view struct {
	points  []*goniodv1.Point // in-memory points from the cursor on (empty when behind the ring or caught up)
	durable int
	changes []change // state changes after the watcher's version, oldest first
	ended   bool     // the scan has ended (its last change may be older than the watcher)
	changed <-chan struct{}
}

// look returns what a watcher at cursor that has seen state version seen may send: at most max in-memory
// points appended to buf[:0], and the state changes it has not seen. It takes no lock unless there are such
// changes. The channel is read first: anything published after it was read closes it.
func (h *hub) look(cursor, max int, seen uint64, buf []*goniodv1.Point) view {
	v := view{changed: *h.changed.Load(), points: buf[:0]}
	v.durable = int(h.durable.Load())
	v.ended = h.ended.Load()
	if h.version.Load() != seen {
		h.mu.Lock()
		for i := range h.history {
			if h.history[i].version > seen {
				v.changes = append(v.changes, h.history[i:]...)
				break
			}
		}
		h.mu.Unlock()
	}
	r := h.ring.Load()
	if r == nil || cursor < 0 || cursor < v.durable-ringSize {
		return v
	}
	for i := cursor; i < min(v.durable, cursor+max); i++ {
		p := r[i%ringSize].Load()
		if p == nil || int(p.Index) != i {
			break // not in memory (resumed after a restart, or overwritten meanwhile): read from the store
		}
		v.points = append(v.points, p)
	}
	return v
}

// snapshot returns the present record and its state version.
func (h *hub) snapshot() (scan.Record, uint64) {
	h.mu.Lock()
	defer h.mu.Unlock()
	return h.rec, h.version.Load()
}

// watching counts a watch in (+1) or out (-1).
func (h *hub) watching(delta int) {
	h.mu.Lock()
	h.watchers += delta
	h.mu.Unlock()
}

// durablePoints is the number of points on disk.
func (h *hub) durablePoints() int { return int(h.durable.Load()) }

// record returns the latest record.
func (h *hub) record() scan.Record {
	h.mu.Lock()
	defer h.mu.Unlock()
	return h.rec
}
