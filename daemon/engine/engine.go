// Package engine runs the lab's scans: a FIFO queue persisted in the store, one scan at a time on the
// instrument controller, every point stored durably before it is published to watchers. After a restart,
// running scans are interrupted (resumable) and queued ones held until an operator releases them.
package engine

import (
	"context"
	"errors"
	"fmt"
	"log/slog"
	"sort"
	"sync"
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
}

// Engine is the scan queue and runner.
type Engine struct {
	store   *store.Store
	ctl     *instrument.Controller
	log     *slog.Logger
	obs     Observer
	version string
	now     func() time.Time

	mu      sync.Mutex
	scans   map[string]*entry
	ids     []string // creation order
	manual  bool     // a manual operation holds the instrument
	running *entry
	// draining: the daemon shuts down; the running scan stops after its point and no other starts (Drain)
	draining bool
	wake     chan struct{}
}

// entry is one scan known to the engine.
type entry struct {
	hub *hub
	// Requests from operators, read by the runner between points; guarded by Engine.mu.
	pauseReq, cancelReq bool
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
		scans: map[string]*entry{}, wake: make(chan struct{}, 1)}
	recs, err := e.store.LoadRecords()
	if err != nil {
		return nil, err
	}
	for _, rec := range recs {
		durable, err := e.recover(rec)
		if err != nil {
			return nil, err
		}
		e.scans[rec.ID] = &entry{hub: newHub(*rec, durable)}
		e.ids = append(e.ids, rec.ID)
	}
	return e, nil
}

// recover brings one loaded record into a consistent state after a start.
func (e *Engine) recover(rec *scan.Record) (int, error) {
	log := e.log.With("scan", rec.ID)
	var reason string
	switch rec.State {
	case scan.Running, scan.Paused:
		reason = "the daemon stopped while the scan was " + string(rec.State)
		rec.State = scan.Interrupted
	case scan.Queued:
		rec.State = scan.Held
		rec.Reason = "queued when the daemon stopped; release to run"
	}
	durable := rec.PointsDone
	if !rec.State.Terminal() && rec.State != scan.Held {
		app, got, err := e.store.OpenAppender(rec.ID)
		if err != nil {
			return 0, fmt.Errorf("recover scan %s: %w", rec.ID, err)
		}
		app.Close()
		if got.DroppedBytes > 0 {
			log.Warn("dropped a torn last line of the points file", "bytes", got.DroppedBytes, "points", got.Points)
		}
		durable = got.Points
	} else if n, err := e.store.CountPoints(rec.ID); err == nil {
		durable = n
	}
	if reason != "" {
		rec.Reason = fmt.Sprintf("%s; %d points durable; resume to continue", reason, durable)
		log.Info("scan interrupted by a restart", "points", durable)
	}
	rec.PointsDone = durable
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

// info describes the instrument for a new scan's record.
func (e *Engine) info(cfg *instrument.Config) scan.Info {
	return scan.Info{
		Instrument: cfg.Name, Driver: cfg.Driver, ConfigHash: cfg.Hash(), DaemonVersion: e.version,
		Axes: cfg.AxisNames(), Channels: cfg.Channels, Crystal: cfg.Crystal, CrystalDNM: cfg.CrystalDNM,
		Anode: cfg.Tube.Anode, DeadTime: cfg.DeadTime, Paralyzable: cfg.DeadTimeParalyzable,
	}
}

// Submit validates a request and queues it. Invalid requests return validate errors; nothing is queued.
func (e *Engine) Submit(r scan.Request) (scan.Record, error) {
	recs, err := e.submit([]scan.Request{r}, "")
	if err != nil {
		return scan.Record{}, err
	}
	return recs[0], nil
}

// SeriesRecord is the stored form of a series.
type SeriesRecord struct {
	ID      string             `json:"id"`
	ScanIDs []string           `json:"scan_ids"`
	Request scan.SeriesRequest `json:"request"`
}

// SubmitSeries validates every scan of a series and queues them all, or none.
func (e *Engine) SubmitSeries(sr scan.SeriesRequest) (SeriesRecord, error) {
	cfg := e.ctl.Config()
	if err := sr.Validate(&cfg); err != nil {
		return SeriesRecord{}, err
	}
	id := e.store.NewSeriesID()
	recs, err := e.submit(sr.Expand(), id)
	if err != nil {
		return SeriesRecord{}, err
	}
	out := SeriesRecord{ID: id, Request: sr}
	for _, r := range recs {
		out.ScanIDs = append(out.ScanIDs, r.ID)
	}
	if err := e.store.SaveSeries(id, out); err != nil {
		return SeriesRecord{}, err
	}
	return out, nil
}

// GetSeries reads a series.
func (e *Engine) GetSeries(id string) (SeriesRecord, error) {
	var s SeriesRecord
	err := e.store.LoadSeries(id, &s)
	return s, err
}

func (e *Engine) submit(reqs []scan.Request, seriesID string) ([]scan.Record, error) {
	cfg := e.ctl.Config()
	plans := make([]*scan.Plan, len(reqs))
	for i, r := range reqs {
		p, err := scan.NewPlan(r, &cfg)
		if err != nil {
			if len(reqs) > 1 {
				return nil, fmt.Errorf("series scan %d: %w", i, err)
			}
			return nil, err
		}
		plans[i] = p
	}
	table := goniodv1.NewPointTable(cfg.AxisNames(), cfg.Channels[1:])
	var out []scan.Record
	for i, r := range reqs {
		rec := scan.Record{
			ID: e.store.NewScanID(), SeriesID: seriesID, Request: r, State: scan.Queued,
			PointsTotal: plans[i].Len(), Created: e.now().UTC(), Info: e.info(&cfg),
		}
		if err := e.store.Create(&rec, table.Header()); err != nil {
			return out, fmt.Errorf("store: %w", err)
		}
		e.mu.Lock()
		e.scans[rec.ID] = &entry{hub: newHub(rec, 0)}
		e.ids = append(e.ids, rec.ID)
		e.mu.Unlock()
		e.log.Info("scan queued", "scan", rec.ID, "kind", r.Kind, "points", rec.PointsTotal, "series", seriesID)
		e.obs.StateChanged(&rec)
		out = append(out, rec)
	}
	e.signal()
	return out, nil
}

// Get returns a scan's record.
func (e *Engine) Get(id string) (scan.Record, error) {
	en, err := e.lookup(id)
	if err != nil {
		return scan.Record{}, err
	}
	return en.hub.record(), nil
}

// List returns up to limit records, newest first, starting after the ID `after` (empty: from the newest), only
// in the given states (all when empty). next is the ID to continue after, empty at the end.
func (e *Engine) List(after string, limit int, states []scan.State) (recs []scan.Record, next string) {
	e.mu.Lock()
	ids := append([]string(nil), e.ids...)
	e.mu.Unlock()
	sort.Strings(ids)
	want := map[scan.State]bool{}
	for _, s := range states {
		want[s] = true
	}
	for i := len(ids) - 1; i >= 0; i-- {
		if after != "" && ids[i] >= after {
			continue
		}
		en, err := e.lookup(ids[i])
		if err != nil {
			continue
		}
		rec := en.hub.record()
		if len(want) > 0 && !want[rec.State] {
			continue
		}
		if len(recs) == limit {
			return recs, recs[len(recs)-1].ID
		}
		recs = append(recs, rec)
	}
	return recs, ""
}

// QueueLength is the number of queued scans.
func (e *Engine) QueueLength() int {
	e.mu.Lock()
	defer e.mu.Unlock()
	n := 0
	for _, en := range e.scans {
		if en.hub.record().State == scan.Queued {
			n++
		}
	}
	return n
}

// Running returns the running scan's record, if any.
func (e *Engine) Running() (scan.Record, bool) {
	e.mu.Lock()
	defer e.mu.Unlock()
	if e.running == nil {
		return scan.Record{}, false
	}
	return e.running.hub.record(), true
}

// setState changes a record's state, stores it and publishes it.
func (e *Engine) setState(en *entry, mutate func(*scan.Record)) (scan.Record, error) {
	rec := en.hub.record()
	mutate(&rec)
	if err := e.store.SaveRecord(&rec); err != nil {
		return rec, err
	}
	en.hub.setRecord(rec)
	e.obs.StateChanged(&rec)
	return rec, nil
}

// Pause asks a running scan to stop after its current point.
func (e *Engine) Pause(id string) (scan.Record, error) {
	return e.request(id, "pause", func(en *entry) { en.pauseReq = true })
}

// Cancel cancels a scan: at once when it is not running, after the current point when it is.
func (e *Engine) Cancel(id string) (scan.Record, error) {
	return e.request(id, "cancel", func(en *entry) { en.cancelReq = true })
}

// request flags a running scan, or applies op at once to one that is not running.
func (e *Engine) request(id, op string, flag func(*entry)) (scan.Record, error) {
	en, err := e.lookup(id)
	if err != nil {
		return scan.Record{}, err
	}
	e.mu.Lock()
	rec := en.hub.record()
	if err := scan.Allow(op, rec.State); err != nil {
		e.mu.Unlock()
		return rec, err
	}
	if rec.State == scan.Running {
		flag(en)
		e.mu.Unlock()
		e.log.Info(op+" requested", "scan", id)
		return rec, nil
	}
	e.mu.Unlock()
	rec, err = e.setState(en, func(r *scan.Record) {
		r.State, r.Reason, r.Ended = scan.Cancelled, "cancelled by an operator", e.now().UTC()
	})
	e.log.Info("scan cancelled", "scan", id)
	e.signal()
	return rec, err
}

// Resume puts a paused or interrupted scan back into the queue; it continues from its next point.
func (e *Engine) Resume(id string) (scan.Record, error) {
	return e.requeue(id, "resume", "resumed by an operator")
}

// Release lets a held scan run.
func (e *Engine) Release(id string) (scan.Record, error) {
	return e.requeue(id, "release", "released by an operator")
}

func (e *Engine) requeue(id, op, reason string) (scan.Record, error) {
	en, err := e.lookup(id)
	if err != nil {
		return scan.Record{}, err
	}
	e.mu.Lock()
	rec := en.hub.record()
	if err := scan.Allow(op, rec.State); err != nil {
		e.mu.Unlock()
		return rec, err
	}
	en.pauseReq, en.cancelReq = false, false
	e.mu.Unlock()
	rec, err = e.setState(en, func(r *scan.Record) { r.State, r.Reason = scan.Queued, reason })
	e.log.Info("scan queued again", "scan", id, "op", op)
	e.signal()
	return rec, err
}

// ErrManual is returned when a manual operation meets a running or paused scan.
var errManualBusy = scan.ErrBusy

// Manual runs fn while no scan runs, keeping the queue from starting one meanwhile. A running or paused scan
// refuses it with ErrBusy naming the scan.
func (e *Engine) Manual(fn func() error) error {
	e.mu.Lock()
	if e.running != nil {
		id := e.running.hub.record().ID
		e.mu.Unlock()
		return fmt.Errorf("%w: scan %s is running; pause or cancel it first", errManualBusy, id)
	}
	for _, id := range e.ids {
		if e.scans[id].hub.record().State == scan.Paused {
			e.mu.Unlock()
			return fmt.Errorf("%w: scan %s is paused; resume or cancel it first", errManualBusy, id)
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
	durable := en.hub.durablePoints()
	if from >= durable {
		return nil
	}
	n := durable - from
	if limit > 0 && limit < n {
		n = limit
	}
	return e.store.ReadPoints(ctx, id, from, n, fn)
}

var errStopped = errors.New("stopped")
