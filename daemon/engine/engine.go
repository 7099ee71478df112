// Package engine runs the lab's scans: a FIFO queue persisted in the store, one scan at a time on the
// instrument controller, every point stored durably before it is published to watchers. After a restart,
// running scans are interrupted (resumable) and queued ones held until an operator releases them.
package engine

import (
	"context"
	"errors"
	"fmt"
	"log/slog"
	"maps"
	"slices"
	"strings"
	"sync"
	"sync/atomic"
	"time"

	"goniod/daemon/instrument"
	"goniod/daemon/scan"
	"goniod/daemon/store"
	goniodv1 "goniod/proto/goniod/v1"
)

// Observer hears about stored points and state changes (metrics, logs). Calls must not block.
type Observer interface {
	PointStored(rec *scan.Record, p *goniodv1.Point, overhead time.Duration)
	StateChanged(rec *scan.Record)
}

// DurableObserver is an Observer that also wants the moment each batch of points became durable, just before
// the batch is published to watchers (optional; found by type assertion). Benchmarks use it to measure fan-out
// latency from the fsync to each watcher.
type DurableObserver interface {
	PointsDurable(scanID string, points []*goniodv1.Point, at time.Time)
}

type nopObserver struct{}

func (nopObserver) PointStored(*scan.Record, *goniodv1.Point, time.Duration) {}
func (nopObserver) StateChanged(*scan.Record)                                {}

// Options configure an engine.
type Options struct {
	Store      *store.Store
	Controller *instrument.Controller
	Log        *slog.Logger
	Observer   Observer
	// Version of the daemon, recorded in every scan.
	Version string
	// Now is the clock for timestamps (default time.Now).
	Now func() time.Time
	// MaxQueued is how many scans may wait to run (queued or held) at one time; 0: no limit.
	MaxQueued int
}

// Engine is the scan queue and runner.
type Engine struct {
	store   *store.Store
	ctl     *instrument.Controller
	log     *slog.Logger
	obs     Observer
	version string
	now     func() time.Time
	// maxQueued: see Options.MaxQueued
	maxQueued int

	// submitMu keeps the scans of one submission (a series) consecutive in the queue and in ID order.
	submitMu sync.Mutex
	// life is the context Run was given (guarded by mu): work started outside the queue, such as an
	// alignment, ends with it.
	life context.Context

	mu    sync.Mutex
	scans map[string]*entry
	ids   []string // in increasing order
	// active: the scans that have not ended, in ID order (what the queue looks at); ended: how many scans
	// ended in each terminal state.
	active  []*entry
	ended   map[scan.State]int
	manual  bool // a manual operation holds the instrument
	running *entry
	// draining: the daemon shuts down; the running scan stops after its point and no other starts (Drain)
	draining bool
	wake     chan struct{}
}

// entry is one scan known to the engine. A scan that has ended and that nobody watches is cold: its hub is
// dropped and its record lives on disk only, read when asked for, so that the daemon's memory does not grow
// with the lab's history. What the queue needs of a cold scan (its state, its points) stays in the entry; an
// ended scan never changes again, so a hub that was dropped stays true for whoever still holds it.
type entry struct {
	id string
	// hub is the scan's record and the publisher of its points and state changes; nil while the scan is cold.
	hub atomic.Pointer[hub]
	// cold is set before the hub is dropped.
	cold atomic.Pointer[coldScan]
	// saveMu orders the changes of the record with their saves.
	saveMu sync.Mutex
	// Requests from operators, read by the runner between points; guarded by Engine.mu.
	pauseReq, cancelReq bool
}

// coldScan is what an entry keeps of an ended scan without its hub.
type coldScan struct {
	state   scan.State
	durable int
}

func newEntry(rec scan.Record, durable int) *entry {
	en := &entry{id: rec.ID}
	if rec.State.Terminal() {
		en.cold.Store(&coldScan{state: rec.State, durable: durable})
	} else {
		en.hub.Store(newHub(rec, durable))
	}
	return en
}

// live returns the hub of a scan that has not ended (queued, running, paused, being changed by an operator):
// only ended scans go cold.
func (en *entry) live() *hub { return en.hub.Load() }

// state is the scan's present state.
func (en *entry) state() scan.State {
	if h := en.hub.Load(); h != nil {
		return h.record().State
	}
	return en.cold.Load().state
}

// durable is the number of the scan's points on disk.
func (en *entry) durable() int {
	if h := en.hub.Load(); h != nil {
		return h.durablePoints()
	}
	return en.cold.Load().durable
}

// cool drops h, the scan's hub, if the scan has ended and h has no watchers. Call it only once the ended
// record is saved: a cold scan's record is read from the store.
func (en *entry) cool(h *hub) {
	h.mu.Lock()
	defer h.mu.Unlock()
	if !h.rec.State.Terminal() || h.watchers > 0 {
		return
	}
	en.cold.Store(&coldScan{state: h.rec.State, durable: int(h.durable.Load())})
	en.hub.CompareAndSwap(h, nil)
}

// record returns a scan's record, from its hub or, for a cold scan, from the store.
func (e *Engine) record(en *entry) (scan.Record, error) {
	if h := en.hub.Load(); h != nil {
		return h.record(), nil
	}
	rec, err := e.store.LoadRecord(en.id)
	if err != nil {
		return scan.Record{}, fmt.Errorf("%w: %w", ErrStorage, err)
	}
	c := en.cold.Load()
	rec.State, rec.PointsDone = c.state, c.durable
	return *rec, nil
}

// warm returns the scan's hub, making one for a cold scan.
func (e *Engine) warm(en *entry) (*hub, error) {
	for {
		if h := en.hub.Load(); h != nil {
			return h, nil
		}
		rec, err := e.record(en)
		if err != nil {
			return nil, err
		}
		if h := newHub(rec, rec.PointsDone); en.hub.CompareAndSwap(nil, h) {
			return h, nil
		}
	}
}

// New loads the store's scans: running (or paused) ones become interrupted with their durable points intact and
// a torn last line cut off; queued ones become held.
func New(o Options) (*Engine, error) {
	if o.Observer == nil {
		o.Observer = nopObserver{}
	}
	if o.Now == nil {
		o.Now = time.Now
	}
	e := &Engine{store: o.Store, ctl: o.Controller, log: o.Log, obs: o.Observer, version: o.Version, now: o.Now,
		maxQueued: o.MaxQueued, scans: map[string]*entry{}, ended: map[scan.State]int{}, wake: make(chan struct{}, 1)}
	recs, err := e.store.LoadRecords()
	if err != nil {
		return nil, err
	}
	for _, rec := range recs {
		durable, err := e.recover(rec)
		if err != nil {
			return nil, err
		}
		e.addLocked(newEntry(*rec, durable)) // the engine is not shared yet
	}
	if err := e.applyStoredAlignment(); err != nil {
		return nil, err
	}
	return e, nil
}

// recover brings one loaded record into a consistent state after a start, and saves it only if it changed:
// a restart with months of ended scans reads their records and writes nothing.
func (e *Engine) recover(rec *scan.Record) (int, error) {
	log := e.log.With("scan", rec.ID)
	was := struct {
		state   scan.State
		reason  string
		points  int
		endedAt time.Time
	}{rec.State, rec.Reason, rec.PointsDone, rec.Ended}
	var reason string
	switch rec.State {
	case scan.Running, scan.Paused:
		reason = "the daemon stopped while the scan was " + string(rec.State)
		rec.State = scan.Interrupted
	case scan.Queued:
		rec.State = scan.Held
		rec.Reason = "queued when the daemon stopped; release to run"
	}
	// An ended scan's record was saved after its last point was stored: its count is final.
	durable := rec.PointsDone
	switch {
	case rec.State == scan.Held:
		if n, err := e.store.CountPoints(rec.ID); err == nil {
			durable = n
		}
	case !rec.State.Terminal():
		app, got, err := e.store.OpenAppender(rec.ID)
		switch {
		case errors.Is(err, store.ErrDamaged):
			// One damaged file must not keep the daemon from starting: the scan fails, its file stays as it is.
			rec.State, rec.Ended = scan.Failed, e.now().UTC()
			reason = ""
			rec.Reason = "found damaged at start, the file is left as it was for inspection: " + err.Error()
			log.Error("points file damaged; scan failed", "err", err)
			if n, err := e.store.CountPoints(rec.ID); err == nil {
				durable = n
			}
		case err != nil:
			return 0, fmt.Errorf("recover scan %s: %w", rec.ID, err)
		default:
			app.Close()
			if got.DroppedBytes > 0 {
				log.Warn("dropped a torn last line of the points file", "bytes", got.DroppedBytes, "points", got.Points)
			}
			durable = got.Points
		}
	}
	if reason != "" {
		rec.Reason = fmt.Sprintf("%s; %d points durable; resume to continue", reason, durable)
		log.Info("scan interrupted by a restart", "points", durable)
	}
	rec.PointsDone = durable
	if rec.State == was.state && rec.Reason == was.reason && rec.PointsDone == was.points && rec.Ended.Equal(was.endedAt) {
		return durable, nil
	}
	if err := e.store.SaveRecord(rec); err != nil {
		return 0, err
	}
	return durable, nil
}

func (e *Engine) signal() {
	select {
	case e.wake <- struct{}{}:
	default:
	}
}

// lookup finds a scan.
func (e *Engine) lookup(id string) (*entry, error) {
	e.mu.Lock()
	defer e.mu.Unlock()
	en, ok := e.scans[id]
	if !ok {
		return nil, fmt.Errorf("scan %q: %w", id, scan.ErrNotFound)
	}
	return en, nil
}

// Get returns a scan's record.
func (e *Engine) Get(id string) (scan.Record, error) {
	en, err := e.lookup(id)
	if err != nil {
		return scan.Record{}, err
	}
	return e.record(en)
}

// List returns up to limit records, newest first, starting after the ID `after` (empty: from the newest), only
// in the given states (all when empty). next is the ID to continue after, empty at the end. Only the records
// of the page are read.
func (e *Engine) List(after string, limit int, states []scan.State) (recs []scan.Record, next string, err error) {
	want := map[scan.State]bool{}
	for _, s := range states {
		want[s] = true
	}
	var page []*entry
	e.mu.Lock()
	for i := len(e.ids) - 1; i >= 0 && len(page) <= limit; i-- { // IDs are made in increasing order
		en := e.scans[e.ids[i]]
		if after != "" && en.id >= after || len(want) > 0 && !want[en.state()] {
			continue
		}
		page = append(page, en)
	}
	e.mu.Unlock()
	if len(page) > limit {
		page, next = page[:limit], page[limit-1].id
	}
	for _, en := range page {
		rec, err := e.record(en)
		if err != nil {
			return nil, "", err
		}
		recs = append(recs, rec)
	}
	return recs, next, nil
}

// CountByState returns how many scans are in each state.
func (e *Engine) CountByState() map[scan.State]int {
	e.mu.Lock()
	defer e.mu.Unlock()
	out := maps.Clone(e.ended)
	for _, en := range e.active {
		out[en.state()]++
	}
	return out
}

// QueueLength is the number of queued scans.
func (e *Engine) QueueLength() int {
	e.mu.Lock()
	defer e.mu.Unlock()
	n := 0
	for _, en := range e.active {
		if en.state() == scan.Queued {
			n++
		}
	}
	return n
}

// addLocked makes a scan known (e.mu held): in ID order, on the active list unless it has ended.
func (e *Engine) addLocked(en *entry) {
	e.scans[en.id] = en
	e.ids = append(e.ids, en.id)
	if c := en.cold.Load(); c != nil {
		e.ended[c.state]++
	} else {
		e.active = append(e.active, en)
	}
	if n := len(e.ids); n > 1 && e.ids[n-2] > e.ids[n-1] {
		// An alignment took its ID while a series was being stored.
		slices.Sort(e.ids)
		slices.SortFunc(e.active, func(a, b *entry) int { return strings.Compare(a.id, b.id) })
	}
}

// retireLocked takes a scan that has just ended off the active list (e.mu held).
func (e *Engine) retireLocked(en *entry, state scan.State) {
	if i := slices.Index(e.active, en); i >= 0 {
		e.active = slices.Delete(e.active, i, i+1)
		e.ended[state]++
	}
}

// Running returns the running scan's record, if any.
func (e *Engine) Running() (scan.Record, bool) {
	e.mu.Lock()
	defer e.mu.Unlock()
	if e.running == nil {
		return scan.Record{}, false
	}
	h := e.running.live()
	if h == nil {
		return scan.Record{}, false // it has just ended; the runner is letting go of it
	}
	return h.record(), true
}

// errManualBusy is returned when a manual operation meets a running or paused scan, or another manual one.
var errManualBusy = scan.ErrBusy

// Manual runs fn while no scan runs, keeping the queue from starting one meanwhile. A running or paused scan
// refuses it with ErrBusy naming the scan.
func (e *Engine) Manual(fn func() error) error {
	e.mu.Lock()
	if en := e.running; en != nil {
		state := en.state()
		e.mu.Unlock()
		if state == scan.Paused {
			return fmt.Errorf("%w: scan %s is paused; resume or cancel it first", errManualBusy, en.id)
		}
		return fmt.Errorf("%w: scan %s is running; pause or cancel it first", errManualBusy, en.id)
	}
	for _, en := range e.active {
		if en.state() == scan.Paused {
			e.mu.Unlock()
			return fmt.Errorf("%w: scan %s is paused; resume or cancel it first", errManualBusy, en.id)
		}
	}
	if e.manual {
		e.mu.Unlock()
		return fmt.Errorf("%w: another manual operation is in progress", errManualBusy)
	}
	e.manual = true
	e.mu.Unlock()
	defer func() {
		e.mu.Lock()
		e.manual = false
		e.mu.Unlock()
		e.signal()
	}()
	return fn()
}

// ReadPoints streams durable points of a scan from index from (at most limit; 0: all).
func (e *Engine) ReadPoints(ctx context.Context, id string, from, limit int, fn func(*goniodv1.Point) error) error {
	en, err := e.lookup(id)
	if err != nil {
		return err
	}
	durable := en.durable()
	if from >= durable {
		return nil
	}
	n := durable - from
	if limit > 0 && limit < n {
		n = limit
	}
	return e.store.ReadPoints(ctx, id, from, n, fn)
}
