package engine

import (
	"context"
	"errors"
	"fmt"
	"log/slog"
	"math"
	"time"

	"google.golang.org/protobuf/types/known/timestamppb"

	"goniod/daemon/instrument"
	"goniod/daemon/scan"
	"goniod/daemon/store"
	"goniod/driver"
	goniodv1 "goniod/proto/goniod/v1"
	"goniod/xray"
)

// Run executes queued scans one at a time, oldest first, until ctx ends. A paused scan holds the queue until it
// is resumed or cancelled.
func (e *Engine) Run(ctx context.Context) {
	e.mu.Lock()
	e.life = ctx
	e.mu.Unlock()
	for {
		if en := e.next(); en != nil {
			e.runScan(ctx, en)
			e.mu.Lock()
			e.running = nil
			e.mu.Unlock()
			continue
		}
		select {
		case <-ctx.Done():
			return
		case <-e.wake:
		}
	}
}

// next picks the oldest queued scan and marks it running, unless a manual operation or a paused scan holds
// the instrument.
func (e *Engine) next() *entry {
	e.mu.Lock()
	defer e.mu.Unlock()
	if e.manual || e.running != nil || e.draining {
		return nil
	}
	var pick *entry
	for _, en := range e.active {
		switch en.state() {
		case scan.Paused:
			return nil
		case scan.Queued:
			if pick == nil {
				pick = en
			}
		}
	}
	if pick != nil {
		e.running = pick
		pick.pauseReq, pick.cancelReq = false, false
	}
	return pick
}

// outcome is how a scan run ended.
type outcome struct {
	state  scan.State
	reason string
}

// runScan runs one scan from its next point to its end, or until it is paused, cancelled, or fails.
func (e *Engine) runScan(ctx context.Context, en *entry) {
	rec := en.live().record()
	log := e.log.With("scan", rec.ID)
	out := e.execute(ctx, en, log)
	e.finish(en, out, log)
}

func (e *Engine) execute(ctx context.Context, en *entry, log *slog.Logger) outcome {
	h := en.live()
	rec := h.record()
	cfg := e.ctl.Config()
	plan, err := scan.NewPlan(rec.Request, &cfg)
	if err != nil {
		return outcome{scan.Failed, "the request is no longer valid for the instrument: " + err.Error()}
	}
	app, got, err := e.store.OpenAppender(rec.ID)
	switch {
	case errors.Is(err, store.ErrDamaged):
		return outcome{scan.Failed, "the points file is damaged, not only at its end: " + err.Error()}
	case err != nil:
		return storageFailure("cannot open the points file", err)
	}
	defer app.Close()
	if got.DroppedBytes > 0 {
		log.Warn("dropped a torn last line of the points file", "bytes", got.DroppedBytes)
	}
	if _, err := e.setState(en, func(r *scan.Record) {
		r.State, r.Reason, r.PointsDone = scan.Running, "", app.Count()
		if r.Started.IsZero() {
			r.Started = e.now().UTC()
		}
	}); err != nil {
		return storageFailure("cannot store the scan record", err)
	}
	log.Info("scan running", "from_point", app.Count(), "points", plan.Len())
	hv, out := e.prepareSource(ctx, en, log)
	if out != nil {
		return *out
	}
	r := &pointRunner{e: e, en: en, plan: plan, cfg: &cfg, hv: hv}
	if err := r.hold(ctx); err != nil {
		return e.fault(ctx, err)
	}
	var durable func([]*goniodv1.Point, time.Time)
	if d, ok := e.obs.(DurableObserver); ok {
		id := rec.ID
		durable = func(points []*goniodv1.Point, at time.Time) { d.PointsDurable(id, points, at) }
	}
	r.commit = startCommitter(app, h, durable, func(batch []taken) {
		rec := h.record()
		last := batch[len(batch)-1].p
		e.ctl.NoteRate(last.RateCps, last.CorrectedRateCps)
		for _, t := range batch {
			e.obs.PointStored(&rec, t.p, t.overhead)
		}
	})
	end := r.run(ctx, app.Count())
	// Every point taken is stored (or the first storage failure reported) before the scan's state changes.
	if err := r.commit.close(); err != nil {
		return storageFailure("the data directory failed", err)
	}
	return end
}

// run takes the points from index first to the end, or until an operator, a fault or a shutdown stops it.
func (r *pointRunner) run(ctx context.Context, first int) outcome {
	e, en, plan := r.e, r.en, r.plan
	for i := first; i < plan.Len(); i++ {
		e.mu.Lock()
		cancel, pause, draining := en.cancelReq, en.pauseReq, e.draining
		e.mu.Unlock()
		switch {
		case draining:
			return outcome{scan.Interrupted, fmt.Sprintf("the daemon shut down after %d points; resume to continue", i)}
		case cancel:
			return outcome{scan.Cancelled, fmt.Sprintf("cancelled by an operator after %d points", i)}
		case pause:
			return outcome{scan.Paused, fmt.Sprintf("paused by an operator after %d points", i)}
		}
		if out := r.point(ctx, i); out != nil {
			return *out
		}
	}
	return outcome{scan.Done, ""}
}

// prepareSource applies the scan's tube setting and reports whether high voltage is on for the scan.
func (e *Engine) prepareSource(ctx context.Context, en *entry, log *slog.Logger) (bool, *outcome) {
	rec := en.live().record()
	src := rec.Source
	if src == nil {
		src = rec.Request.Source
	}
	if src == nil {
		st, err := e.ctl.Status(ctx)
		if err != nil {
			o := e.fault(ctx, err)
			return false, &o
		}
		if !st.HighVoltage {
			log.Info("scan runs with high voltage off (no source in the request)")
			return false, nil
		}
		s := e.ctl.State().Source
		src = &scan.Source{KV: s.KV, MA: s.MA}
	}
	cfg := e.ctl.Config()
	if err := e.ctl.SetSource(ctx, src.KV, src.MA); err != nil {
		o := e.fault(ctx, err)
		return false, &o
	}
	if err := e.ctl.SetHighVoltage(ctx, true); err != nil {
		o := e.fault(ctx, err)
		return false, &o
	}
	log.Info("high voltage on for the scan", "kv", src.KV, "ma", src.MA, "anode", cfg.Tube.Anode)
	if rec.Source == nil {
		if _, err := e.setState(en, func(r *scan.Record) { r.Source = src }); err != nil {
			o := storageFailure("cannot store the scan record", err)
			return true, &o
		}
	}
	if rec.Request.Settle > 0 {
		if err := e.ctl.Wait(ctx, rec.Request.Settle); err != nil {
			o := e.fault(ctx, err)
			return true, &o
		}
	}
	return true, nil
}

// fault turns an error from the instrument into an outcome: a lost link or an open interlock pauses the scan
// (resumable), a daemon shutdown interrupts it, anything else fails it.
func (e *Engine) fault(ctx context.Context, err error) outcome {
	switch {
	case errors.Is(context.Cause(ctx), errCallerGone):
		return outcome{scan.Cancelled, "cancelled: " + errCallerGone.Error()}
	case ctx.Err() != nil:
		return outcome{scan.Interrupted, "the daemon is shutting down; resume to continue"}
	case errors.Is(err, driver.ErrLinkDown):
		return outcome{scan.Paused, "instrument link down: " + err.Error() + "; resume when the link is back"}
	case errors.Is(err, driver.ErrInterlockOpen):
		return outcome{scan.Paused, "interlock open, high voltage off: " + err.Error() + "; close the enclosure and resume"}
	case errors.Is(err, driver.ErrOutOfRange), errors.Is(err, driver.ErrUnknownAxis):
		return outcome{scan.Failed, "the instrument refused: " + err.Error()}
	}
	return outcome{scan.Paused, "instrument error: " + err.Error() + "; resume to retry"}
}

// storageFailure stops a scan whose data directory failed: paused, so that it holds the queue (the next scan
// would fail the same way) and can be resumed once the disk has room or is writable again.
func storageFailure(what string, err error) outcome {
	return outcome{scan.Paused, fmt.Sprintf("%s: %v; high voltage off; free space on (or repair) the data directory, then resume", what, err)}
}

// finish records how a scan ended and leaves the instrument safe: high voltage off unless a finished scan asked
// to keep it.
func (e *Engine) finish(en *entry, out outcome, log *slog.Logger) {
	rec := en.live().record()
	keep := out.state == scan.Done && rec.Request.KeepHighVoltage
	if !keep {
		e.highVoltageOff(log)
	}
	if out.state.Terminal() {
		log.Info("scan ended", "state", out.state, "reason", out.reason, "points", rec.PointsDone)
	} else {
		log.Warn("scan stopped", "state", out.state, "reason", out.reason, "points", rec.PointsDone)
	}
	_, err := e.setState(en, func(r *scan.Record) {
		r.State, r.Reason = out.state, out.reason
		if out.state.Terminal() {
			r.Ended = e.now().UTC()
		}
	})
	if err != nil {
		log.Error("cannot store the scan's final state", "state", out.state, "err", err)
	}
}

// highVoltageOff switches the tube off, falling back to a halt when the instrument does not answer.
func (e *Engine) highVoltageOff(log *slog.Logger) {
	ctx, cancel := context.WithTimeout(context.Background(), 5*time.Second)
	defer cancel()
	if err := e.ctl.SetHighVoltage(ctx, false); err != nil {
		log.Warn("high voltage off failed; halting the instrument", "err", err)
		if err := e.ctl.Halt(); err != nil {
			log.Error("halt failed: high voltage state unknown", "err", err)
		}
	}
}

// pointRunner takes the points of one scan run.
type pointRunner struct {
	e    *Engine
	en   *entry
	plan *scan.Plan
	cfg  *instrument.Config
	// commit makes taken points durable and publishes them.
	commit *committer
	hv     bool
	// held positions of the axes the plan does not move: requested and read-back.
	heldSet, heldActual map[string]float64
}

// hold reads where the axes the plan does not move are, so every point records every axis.
func (r *pointRunner) hold(ctx context.Context) error {
	if err := r.e.ctl.Refresh(ctx); err != nil {
		return err
	}
	pos := r.e.ctl.State().Positions
	r.heldSet, r.heldActual = map[string]float64{}, map[string]float64{}
	for _, a := range r.cfg.Axes {
		r.heldSet[a.Name], r.heldActual[a.Name] = pos[a.Name], pos[a.Name]
	}
	return nil
}

// point takes point i: move, count, check the source stayed on, then hand it to the committer, which stores
// and publishes it. It returns nil to go on.
func (r *pointRunner) point(ctx context.Context, i int) *outcome {
	e := r.e
	t0 := time.Now()
	targets := r.plan.Targets(i)
	moves := make([]instrument.Target, len(targets))
	for k, t := range targets {
		moves[k] = instrument.Target{Axis: t.Axis, Deg: t.Deg}
	}
	td := time.Now()
	actual, err := e.ctl.MoveTo(ctx, moves)
	if err != nil {
		o := e.fault(ctx, err)
		return &o
	}
	counts, err := r.count(ctx)
	if err != nil {
		o := e.fault(ctx, err)
		return &o
	}
	if r.hv {
		st, err := e.ctl.Status(ctx)
		if err != nil {
			o := e.fault(ctx, err)
			return &o
		}
		if !st.HighVoltage || !st.InterlockClosed {
			why := "high voltage went off during the point"
			if !st.InterlockClosed {
				why = "interlock opened during the point"
			}
			return &outcome{scan.Paused, fmt.Sprintf("%s; point %d discarded; close the enclosure and resume", why, i)}
		}
	}
	inDriver := time.Since(td)
	p := r.build(i, targets, actual, counts)
	if err := r.commit.take(taken{p: p, overhead: time.Since(t0) - inDriver}); err != nil {
		o := storageFailure("the data directory failed", err)
		return &o
	}
	return nil
}

// count counts one point: a fixed dwell, or slices until the relative Poisson error reaches the target or the
// dwell (the longest allowed) is used up.
func (r *pointRunner) count(ctx context.Context) (driver.Counts, error) {
	req := r.en.live().record().Request
	if req.RelativeError == 0 {
		return r.e.ctl.Count(ctx, req.Dwell)
	}
	target := 1 / (req.RelativeError * req.RelativeError) // counts needed
	slice := req.MinDwell
	if slice <= 0 {
		slice = max(req.Dwell/100, scan.MinSlice)
	}
	var total driver.Counts
	for total.Gate < req.Dwell {
		gate := min(slice, req.Dwell-total.Gate)
		c, err := r.e.ctl.Count(ctx, gate)
		if err != nil {
			return total, err
		}
		total.Gate += c.Gate
		if total.Channels == nil {
			total.Channels = make([]uint64, len(c.Channels))
		}
		for k := range c.Channels {
			if k < len(total.Channels) {
				total.Channels[k] += c.Channels[k]
			}
		}
		n := float64(total.Channels[0])
		if n >= target {
			break
		}
		if n > 0 {
			// Count the rest in one gate, from the rate seen so far.
			need := time.Duration((target/n - 1) * float64(total.Gate))
			slice = max(min(need, req.Dwell-total.Gate), scan.MinSlice)
		} else {
			slice *= 2
		}
	}
	return total, nil
}

// build makes the point record.
func (r *pointRunner) build(i int, targets []scan.Target, actual map[string]float64, c driver.Counts) *goniodv1.Point {
	e := r.e
	set := make(map[string]float64, len(targets))
	for _, t := range targets {
		set[t.Axis] = t.Deg
	}
	p := &goniodv1.Point{Index: uint32(i), Time: timestamppb.New(e.now())}
	for _, a := range r.cfg.Axes {
		s, ok := set[a.Name]
		act := actual[a.Name]
		if !ok {
			s, act = r.heldSet[a.Name], r.heldActual[a.Name]
		}
		p.Axes = append(p.Axes, &goniodv1.AxisReading{Name: a.Name, SetDeg: s, ActualDeg: act})
	}
	secs := c.Gate.Seconds()
	p.DwellS = secs
	p.Counts = c.Channels[0]
	raw := xray.PoissonRate(p.Counts, secs)
	p.RateCps, p.RateErrCps = raw.CPS, raw.Err
	model := xray.NonParalyzable
	if r.cfg.DeadTimeParalyzable {
		model = xray.Paralyzable
	}
	if tr, err := xray.TrueRate(raw, r.cfg.DeadTime.Seconds(), model); err == nil {
		p.CorrectedRateCps, p.CorrectedRateErrCps = tr.CPS, tr.Err
	} else {
		p.CorrectedRateCps, p.CorrectedRateErrCps = math.Inf(1), math.Inf(1)
	}
	src := e.ctl.State().Source
	p.TubeKv, p.TubeMa = src.KV, src.MA
	if !src.HighVoltage {
		p.TubeKv, p.TubeMa = 0, 0
	}
	if ax := r.cfg.CrystalAxis(); ax != "" && r.cfg.CrystalDNM > 0 {
		for _, a := range p.Axes {
			if a.Name == ax && a.ActualDeg > 0 && a.ActualDeg < 90 {
				wl := xray.WavelengthNM(a.ActualDeg, r.cfg.CrystalDNM, 1)
				en := xray.EnergyKeV(wl)
				p.WavelengthNm, p.EnergyKev = &wl, &en
			}
		}
	}
	for k := 1; k < len(c.Channels) && k < len(r.cfg.Channels); k++ {
		p.Channels = append(p.Channels, &goniodv1.ChannelReading{Name: r.cfg.Channels[k], Counts: c.Channels[k]})
	}
	return p
}
