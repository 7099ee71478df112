package engine

import (
	"sync"
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
// waits for a watcher: each watcher pulls at its own pace and wakes on a channel that is closed at every change.
type hub struct {
	mu      sync.RWMutex
	rec     scan.Record
	durable int               // points [0, durable) are on disk
	ring    []*goniodv1.Point // recent points by index % ringSize; nil while the scan does not run
	version uint64            // bumped at every state change
	history []change          // the latest state changes, oldest first
	changed chan struct{}     // closed and replaced at every publish and state change
	// wake-up pacing (see wakeInterval)
	lastWake    time.Time
	wakePending bool
}

// change is a state change and how many points were durable when it happened.
type change struct {
	version uint64
	durable int
	rec     scan.Record
}

func newHub(rec scan.Record, durable int) *hub {
	return &hub{rec: rec, durable: durable, changed: make(chan struct{})}
}

// publish makes durable points visible; points must continue the sequence.
func (h *hub) publish(points ...*goniodv1.Point) {
	h.mu.Lock()
	if h.ring == nil {
		h.ring = make([]*goniodv1.Point, ringSize)
	}
	for _, p := range points {
		h.ring[int(p.Index)%ringSize] = p
		h.durable = int(p.Index) + 1
	}
	h.rec.PointsDone = h.durable
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
	h.mu.Unlock()
}

// setRecord publishes a state change.
func (h *hub) setRecord(rec scan.Record) {
	h.mu.Lock()
	h.rec = rec
	h.version++
	if len(h.history) == historySize {
		h.history = append(h.history[:0], h.history[1:]...)
	}
	h.history = append(h.history, change{version: h.version, durable: h.durable, rec: rec})
	if rec.State.Terminal() || rec.State == scan.Queued || rec.State == scan.Held {
		h.ring = nil // not running: free the memory; watchers read the store
	}
	h.wakeLocked()
	h.mu.Unlock()
}

func (h *hub) wakeLocked() {
	close(h.changed)
	h.changed = make(chan struct{})
	h.lastWake, h.wakePending = time.Now(), false
}

// view is what a watcher sees at one moment.
type view struct {
	points  []*goniodv1.Point // in-memory points from the cursor on (empty when behind the ring or caught up)
	durable int
	rec     scan.Record
	version uint64
	changes []change // state changes after the watcher's version, oldest first
	changed <-chan struct{}
}

// look returns the state for a watcher at cursor that has seen state version seen, with at most max
// in-memory points appended to buf[:0].
func (h *hub) look(cursor, max int, seen uint64, buf []*goniodv1.Point) view {
	h.mu.RLock()
	defer h.mu.RUnlock()
	v := view{durable: h.durable, rec: h.rec, version: h.version, changed: h.changed, points: buf[:0]}
	for i := range h.history {
		if h.history[i].version > seen {
			v.changes = append(v.changes, h.history[i:]...)
			break
		}
	}
	oldest := h.durable - ringSize
	if h.ring != nil && cursor < h.durable && cursor >= oldest && cursor >= 0 {
		end := min(h.durable, cursor+max)
		for i := cursor; i < end; i++ {
			p := h.ring[i%ringSize]
			if p == nil || int(p.Index) != i {
				break // not in memory (scan resumed after a restart): read from the store
			}
			v.points = append(v.points, p)
		}
	}
	return v
}

// durablePoints is the number of points on disk.
func (h *hub) durablePoints() int {
	h.mu.RLock()
	defer h.mu.RUnlock()
	return h.durable
}

// record returns the latest record.
func (h *hub) record() scan.Record {
	h.mu.RLock()
	defer h.mu.RUnlock()
	return h.rec
}
