package engine

import (
	"fmt"

	"goniod/daemon/instrument"
	"goniod/daemon/scan"
	"goniod/daemon/validate"
	goniodv1 "goniod/proto/goniod/v1"
)

// info describes the instrument for a new scan's record.
func (e *Engine) info(cfg *instrument.Config) scan.Info {
	return scan.Info{
		Instrument: cfg.Name, Identity: e.ctl.Identity(), Driver: cfg.Driver, ConfigHash: cfg.Hash(),
		DaemonVersion: e.version, Axes: cfg.AxisNames(), Channels: cfg.Channels, Crystal: cfg.Crystal,
		CrystalDNM: cfg.CrystalDNM, Anode: cfg.Tube.Anode, DeadTime: cfg.DeadTime, Paralyzable: cfg.DeadTimeParalyzable,
	}
}

// Submit validates a request and queues it. Invalid requests return validate errors; nothing is queued.
func (e *Engine) Submit(r scan.Request) (scan.Record, error) {
	cfg := e.ctl.Config()
	p, err := scan.NewPlan(r, &cfg)
	if err != nil {
		return scan.Record{}, err
	}
	e.submitMu.Lock()
	defer e.submitMu.Unlock()
	if err := e.roomFor(1); err != nil {
		return scan.Record{}, err
	}
	rec, _, err := e.create(r, p, "", e.store.NewScanID(), &cfg)
	if err != nil {
		return scan.Record{}, err
	}
	e.signal()
	return rec, nil
}

// SeriesRecord is the stored form of a series.
type SeriesRecord struct {
	ID      string             `json:"id"`
	ScanIDs []string           `json:"scan_ids"`
	Request scan.SeriesRequest `json:"request"`
}

// SubmitSeries validates every scan of a series and queues them all, or none. The scans are consecutive in the
// queue; high voltage stays on between them and goes off after the last unless the series says otherwise.
func (e *Engine) SubmitSeries(sr scan.SeriesRequest) (SeriesRecord, error) {
	cfg := e.ctl.Config()
	if err := sr.Validate(&cfg); err != nil {
		return SeriesRecord{}, err
	}
	reqs := sr.Expand()
	plans := make([]*scan.Plan, len(reqs))
	for i, r := range reqs {
		p, err := scan.NewPlan(r, &cfg)
		if err != nil {
			return SeriesRecord{}, prefixFields(err, "series.scan.")
		}
		plans[i] = p
	}
	e.submitMu.Lock()
	defer e.submitMu.Unlock()
	if err := e.roomFor(len(reqs)); err != nil {
		return SeriesRecord{}, err
	}
	out := SeriesRecord{ID: e.store.NewSeriesID(), Request: sr}
	for range reqs {
		out.ScanIDs = append(out.ScanIDs, e.store.NewScanID())
	}
	// The series is stored first: a crash part-way leaves a series naming scans that do not exist, never scans
	// naming a series that does not.
	if err := e.store.SaveSeries(out.ID, out); err != nil {
		return SeriesRecord{}, fmt.Errorf("%w: %w", ErrStorage, err)
	}
	for i, r := range reqs {
		if _, _, err := e.create(r, plans[i], out.ID, out.ScanIDs[i], &cfg); err != nil {
			e.signal()
			return out, fmt.Errorf("series %s, scan %d of %d: %w", out.ID, i+1, len(reqs), err)
		}
	}
	e.signal()
	return out, nil
}

// GetSeries reads a series.
func (e *Engine) GetSeries(id string) (SeriesRecord, error) {
	var s SeriesRecord
	err := e.store.LoadSeries(id, &s)
	return s, err
}

// roomFor returns ErrQueueFull when n more scans would take the scans waiting to run beyond the limit. The
// caller holds submitMu, so that no other submission takes the room meanwhile.
func (e *Engine) roomFor(n int) error {
	if e.maxQueued <= 0 {
		return nil
	}
	waiting := 0
	e.mu.Lock()
	for _, en := range e.active {
		if s := en.state(); s == scan.Queued || s == scan.Held {
			waiting++
		}
	}
	e.mu.Unlock()
	if waiting+n > e.maxQueued {
		return fmt.Errorf("%w: %d scans are queued or held and %d more would pass the limit of %d (limits.max_queued); "+
			"cancel some or let them run first", scan.ErrQueueFull, waiting, n, e.maxQueued)
	}
	return nil
}

// create stores a new queued scan and makes it known to the engine.
func (e *Engine) create(r scan.Request, p *scan.Plan, seriesID, id string, cfg *instrument.Config) (scan.Record, *entry, error) {
	table := goniodv1.NewPointTable(cfg.AxisNames(), cfg.Channels[1:])
	rec := scan.Record{
		ID: id, SeriesID: seriesID, Request: r, State: scan.Queued,
		PointsTotal: p.Len(), Created: e.now().UTC(), Info: e.info(cfg),
	}
	if err := e.store.Create(&rec, table.Header()); err != nil {
		return rec, nil, fmt.Errorf("%w: %w", ErrStorage, err)
	}
	en := newEntry(rec, 0)
	e.mu.Lock()
	e.addLocked(en)
	e.mu.Unlock()
	e.log.Info("scan queued", "scan", rec.ID, "kind", r.Kind, "points", rec.PointsTotal, "series", seriesID, "label", r.Label)
	e.obs.StateChanged(&rec)
	return rec, en, nil
}

// prefixFields puts prefix before the field names of a validation error (e.g. the scan of a series).
func prefixFields(err error, prefix string) error {
	fields := validate.Fields(err)
	if len(fields) == 0 {
		return err
	}
	out := make(validate.Errors, len(fields))
	for i, f := range fields {
		out[i] = &validate.FieldError{Field: prefix + f.Field, Reason: f.Reason}
	}
	return out
}
