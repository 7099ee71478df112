package engine

import (
	"context"
	"errors"
	"fmt"
	"log/slog"
	"math"
	"time"

	"goniod/daemon/instrument"
	"goniod/daemon/scan"
	"goniod/daemon/validate"
	goniodv1 "goniod/proto/goniod/v1"
	"goniod/xray"
)

// AlignRequest asks for the zero offsets of the crystal and detector axes.
type AlignRequest struct {
	// Dwell per point of the fine scans (default 1 s); the coarse searches count a quarter of it.
	Dwell time.Duration
	// Store the offsets found in the instrument configuration (kept in the data directory).
	Store bool
	// Source for the alignment; nil: the present setting. High voltage is on for the alignment and off after.
	Source *scan.Source
	// SearchDeg is the half-width of the coarse search around each axis's present zero (default 1°).
	SearchDeg float64
	// Order of the crystal's reference reflection (0: the second when both axes reach it and the crystal
	// allows it, else the first).
	Order int
}

// AxisOffset is the zero offset found for one axis (read-back angle = motor angle − offset).
type AxisOffset struct {
	Axis        string  `json:"axis"`
	OffsetDeg   float64 `json:"offset_deg"`
	ErrDeg      float64 `json:"offset_err_deg"`
	PreviousDeg float64 `json:"previous_offset_deg"`
}

// Alignment is the result of the alignment routine, and the stored alignment.
type Alignment struct {
	Offsets   []AxisOffset `json:"offsets"`
	Stored    bool         `json:"stored"`
	ScanIDs   []string     `json:"scan_ids"`
	Reference string       `json:"reference"`
	Time      time.Time    `json:"time"`
}

// Scan geometry of the alignment. The direct beam through the detector slit is a flat top about as wide as
// the slit (tenths of a degree); a rocking curve of a good crystal is about a tenth of a degree wide. The
// coarse steps are below half those widths so that no peak falls between two points.
const (
	defaultAlignSearch = 1.0
	maxAlignSearch     = 5.0
	coarseStepDeg      = 0.05
	beamStepDeg        = 0.02
	beamHalfWindowDeg  = 0.6
	rockStepDeg        = 0.01
	rockHalfWindowDeg  = 0.3
	// alignSettle lets the tube's high voltage settle after it is switched on.
	alignSettle = 2 * time.Second
)

// errCallerGone ends an alignment whose caller went away.
var errCallerGone = errors.New("the caller of the alignment went away")

// alignPlan is a validated alignment request with the geometry it needs.
type alignPlan struct {
	req                AlignRequest
	crystal, detector  instrument.Axis
	ratio              float64 // detector angle per crystal angle (2 for θ–2θ)
	braggDeg           float64 // the reference reflection's Bragg angle
	reference          string
	coarseDwell, dwell time.Duration
}

// planAlignment checks an alignment request against the instrument: it needs coupled crystal and detector
// axes, the crystal's d-spacing and an anode line the tube excites.
func planAlignment(req AlignRequest, cfg *instrument.Config, present instrument.State) (*alignPlan, error) {
	var es validate.Errors
	if req.Dwell == 0 {
		req.Dwell = time.Second
	}
	if req.Dwell < 4*scan.MinSlice || req.Dwell > cfg.MaxDwell {
		es.Add("dwell", "%v is outside the allowed range [%v, %v]", req.Dwell, 4*scan.MinSlice, cfg.MaxDwell)
	}
	if req.SearchDeg == 0 {
		req.SearchDeg = defaultAlignSearch
	}
	es.Range("search_deg", req.SearchDeg, 0.2, maxAlignSearch, "°")
	kv := present.Source.KV
	if req.Source != nil {
		cfg.CheckSource(&es, "source", req.Source.KV, req.Source.MA)
		kv = req.Source.KV
	} else if present.Source.KV <= 0 || present.Source.MA <= 0 {
		es.Add("source", "missing, and the tube is set to %g kV, %g mA: give the setting for the alignment", present.Source.KV, present.Source.MA)
	}
	p := &alignPlan{req: req, dwell: req.Dwell, coarseDwell: max(req.Dwell/4, scan.MinSlice)}
	if err := p.geometry(&es, cfg, kv); err != nil {
		return nil, err
	}
	if err := es.Err(); err != nil {
		return nil, err
	}
	return p, nil
}

// geometry finds the axes and the reference reflection. Missing instrument facts are a precondition failure,
// not a bad request.
func (p *alignPlan) geometry(es *validate.Errors, cfg *instrument.Config, kv float64) error {
	var ok bool
	if p.crystal, ok = cfg.Axis(cfg.CrystalAxis()); !ok || p.crystal.Coupling == 0 {
		return fmt.Errorf("%w: alignment needs a coupled crystal axis (coupling 1) in the instrument configuration", scan.ErrState)
	}
	for _, a := range cfg.Coupled() {
		if a.Name != p.crystal.Name {
			p.detector, p.ratio = a, a.Coupling/p.crystal.Coupling
			break
		}
	}
	if p.detector.Name == "" {
		return fmt.Errorf("%w: alignment needs a detector axis coupled to %s", scan.ErrState, p.crystal.Name)
	}
	if cfg.CrystalDNM <= 0 {
		return fmt.Errorf("%w: alignment needs the crystal's d-spacing (instrument.crystal_d_nm)", scan.ErrState)
	}
	anode, err := xray.LookupAnode(cfg.Tube.Anode)
	if err != nil {
		return fmt.Errorf("%w: alignment needs a known anode: %v", scan.ErrState, err)
	}
	line, ok := referenceLine(anode, kv)
	if !ok {
		es.Add("source.kv", "%g kV excites no reference line of %s (Kα1 needs more than %.2f kV)", kv, anode.Symbol, anode.KEdgeKeV)
		return nil
	}
	allowed := func(n int) bool { return true }
	if c, err := xray.LookupCrystal(cfg.Crystal); err == nil {
		allowed = c.OrderAllowed
	}
	orders := []int{2, 1}
	if p.req.Order != 0 {
		if p.req.Order < 0 || p.req.Order > 6 {
			es.Add("order", "%d is outside the allowed range [0, 6]", p.req.Order)
			return nil
		}
		orders = []int{p.req.Order}
	}
	for _, n := range orders {
		th, ok := xray.BraggAngleDeg(line.WavelengthNM(), cfg.CrystalDNM, n)
		if !ok || !allowed(n) || !p.reaches(th) {
			continue
		}
		p.braggDeg = th
		p.reference = fmt.Sprintf("%s %s, %s, n = %d, θB = %.3f°", anode.Symbol, line.Name, crystalName(cfg), n, th)
		return nil
	}
	es.Add("order", "no order of %s %s on %s in %v lies within the axes' limits", anode.Symbol, line.Name, crystalName(cfg), orders)
	return nil
}

// reaches reports whether both axes can scan the rocking curve at Bragg angle th.
func (p *alignPlan) reaches(th float64) bool {
	s := p.req.SearchDeg + rockHalfWindowDeg
	return th-s >= p.crystal.MinDeg && th+s <= p.crystal.MaxDeg && th < 80 &&
		p.ratio*th+p.req.SearchDeg <= p.detector.MaxDeg && p.detector.MinDeg <= -p.req.SearchDeg-beamHalfWindowDeg &&
		p.crystal.MinDeg <= 0 && p.detector.MaxDeg >= p.req.SearchDeg+beamHalfWindowDeg
}

// referenceLine is the strongest line the tube excites for the alignment: Kα1, else Lα1 (tungsten below its K
// edge).
func referenceLine(a xray.Anode, kv float64) (xray.Line, bool) {
	for _, name := range []string{"Kα1", "Lα1"} {
		if l, ok := a.Line(name); ok && kv > l.EdgeKeV {
			return l, true
		}
	}
	return xray.Line{}, false
}

func crystalName(cfg *instrument.Config) string {
	if cfg.Crystal != "" {
		return cfg.Crystal
	}
	return fmt.Sprintf("d = %g nm", cfg.CrystalDNM)
}

// Align finds the zero offsets of the detector axis (through the direct beam near 2θ = 0) and of the crystal
// axis (by a rocking curve of the anode's reference line at its Bragg angle), reports them with their
// uncertainties and, when asked, stores and applies them. It runs as a manual operation: refused while a scan
// runs or is paused, and the queue waits for it. Its scans are stored like any other, for inspection. High
// voltage is on for it and off afterwards.
func (e *Engine) Align(ctx context.Context, req AlignRequest) (Alignment, error) {
	cfg := e.ctl.Config()
	p, err := planAlignment(req, &cfg, e.ctl.State())
	if err != nil {
		return Alignment{}, err
	}
	e.mu.Lock()
	life := e.life
	e.mu.Unlock()
	if life == nil {
		life = context.Background()
	}
	actx, cancel := context.WithCancelCause(life)
	defer cancel(nil)
	stop := context.AfterFunc(ctx, func() { cancel(errCallerGone) })
	defer stop()
	var out Alignment
	err = e.Manual(func() error {
		var err error
		out, err = e.align(actx, p)
		return err
	})
	return out, err
}

// align runs the four scans of an alignment and fits them.
func (e *Engine) align(ctx context.Context, p *alignPlan) (Alignment, error) {
	log := e.log.With("op", "align")
	defer e.highVoltageOff(log)
	cfg := e.ctl.Config()
	src := p.req.Source
	if src == nil {
		s := e.ctl.State().Source
		src = &scan.Source{KV: s.KV, MA: s.MA}
	}
	out := Alignment{Reference: p.reference, Time: e.now().UTC()}
	log.Info("alignment starts", "reference", p.reference, "kv", src.KV, "ma", src.MA, "search_deg", p.req.SearchDeg)

	// The detector through the direct beam, the crystal parallel to the beam.
	if _, err := e.ctl.MoveTo(ctx, []instrument.Target{{Axis: p.crystal.Name, Deg: 0}}); err != nil {
		return out, fmt.Errorf("alignment: move %s to 0°: %w", p.crystal.Name, err)
	}
	s := p.req.SearchDeg
	pts, err := e.alignScan(ctx, &out, p.detector.Name, -s, s, coarseStepDeg, p.coarseDwell, src, alignSettle, "direct beam, coarse search")
	if err != nil {
		return out, err
	}
	if err := found(pts, p.detector.Name, "the direct beam", s, out.ScanIDs); err != nil {
		return out, err
	}
	c0 := strongest(pts, p.detector.Name)
	pts, err = e.alignScan(ctx, &out, p.detector.Name, c0-beamHalfWindowDeg, c0+beamHalfWindowDeg, beamStepDeg, p.dwell, src, 0, "direct beam")
	if err != nil {
		return out, err
	}
	beam, err := fitDirectBeam(axisProfile(pts, p.detector.Name))
	if err != nil {
		return out, fmt.Errorf("alignment: direct beam in scan %s: %w", out.ScanIDs[len(out.ScanIDs)-1], err)
	}
	log.Info("direct beam found", "axis", p.detector.Name, "centre_deg", beam.Centre, "err_deg", beam.Err, "width_deg", beam.Width)

	// The crystal rocked through the reference reflection, the detector at its corrected Bragg angle.
	if _, err := e.ctl.MoveTo(ctx, []instrument.Target{{Axis: p.detector.Name, Deg: p.ratio*p.braggDeg + beam.Centre}}); err != nil {
		return out, fmt.Errorf("alignment: move %s to the reflection: %w", p.detector.Name, err)
	}
	pts, err = e.alignScan(ctx, &out, p.crystal.Name, p.braggDeg-s, p.braggDeg+s, coarseStepDeg/2, p.coarseDwell, src, 0, "rocking curve, coarse search")
	if err != nil {
		return out, err
	}
	if err := found(pts, p.crystal.Name, "the reflection", s, out.ScanIDs); err != nil {
		return out, err
	}
	t0 := strongest(pts, p.crystal.Name)
	pts, err = e.alignScan(ctx, &out, p.crystal.Name, t0-rockHalfWindowDeg, t0+rockHalfWindowDeg, rockStepDeg, p.dwell, src, 0, "rocking curve")
	if err != nil {
		return out, err
	}
	rock, err := fitRockingCurve(axisProfile(pts, p.crystal.Name))
	if err != nil {
		return out, fmt.Errorf("alignment: rocking curve in scan %s: %w", out.ScanIDs[len(out.ScanIDs)-1], err)
	}
	log.Info("rocking curve found", "axis", p.crystal.Name, "centre_deg", rock.Centre, "err_deg", rock.Err, "fwhm_deg", rock.Width)

	prevC, prevD := offsetOf(&cfg, p.crystal.Name), offsetOf(&cfg, p.detector.Name)
	out.Offsets = []AxisOffset{
		{Axis: p.crystal.Name, OffsetDeg: prevC + rock.Centre - p.braggDeg, ErrDeg: rock.Err, PreviousDeg: prevC},
		{Axis: p.detector.Name, OffsetDeg: prevD + beam.Centre, ErrDeg: beam.Err, PreviousDeg: prevD},
	}
	if p.req.Store {
		if err := e.storeAlignment(ctx, &out, log); err != nil {
			return out, err
		}
	}
	return out, nil
}

// found checks that a coarse search saw its peak, whole, and says what to do when it did not.
func found(pts []*goniodv1.Point, axis, what string, search float64, ids []string) error {
	_, err := axisProfile(pts, axis).outline(searchSignificance)
	switch {
	case errors.Is(err, errNoPeak):
		return fmt.Errorf("alignment: %s is not within ±%g° of %s's present zero (scan %s): widen the search, or check the source and the beam path: %w",
			what, search, axis, ids[len(ids)-1], err)
	case err != nil:
		return fmt.Errorf("alignment: %s in scan %s: %w", what, ids[len(ids)-1], err)
	}
	return nil
}

// alignScan runs one axis scan of the alignment outside the queue and returns its points.
func (e *Engine) alignScan(ctx context.Context, out *Alignment, axis string, from, to, step float64, dwell time.Duration,
	src *scan.Source, settle time.Duration, what string) ([]*goniodv1.Point, error) {
	r := scan.Request{Kind: scan.AxisOnly, Axis: axis, FromDeg: round(from, step), ToDeg: round(to, step), StepDeg: step,
		Dwell: dwell, Source: src, KeepHighVoltage: true, Settle: settle,
		Label: "alignment: " + what, Note: out.Reference}
	cfg := e.ctl.Config()
	p, err := scan.NewPlan(r, &cfg)
	if err != nil {
		return nil, fmt.Errorf("alignment, %s: %w", what, err)
	}
	rec, en, err := e.create(r, p, "", e.store.NewScanID(), &cfg)
	if err != nil {
		return nil, fmt.Errorf("alignment, %s: %w", what, err)
	}
	out.ScanIDs = append(out.ScanIDs, rec.ID)
	e.mu.Lock()
	e.running = en
	e.mu.Unlock()
	e.runScan(ctx, en)
	e.mu.Lock()
	e.running = nil
	e.mu.Unlock()
	final, err := e.record(en)
	if err != nil {
		return nil, fmt.Errorf("alignment, %s: %w", what, err)
	}
	if final.State != scan.Done {
		if !final.State.Terminal() {
			// A paused alignment scan would hold the queue for a routine that has given up: it ends here.
			if _, err := e.setState(en, func(r *scan.Record) {
				r.State, r.Reason, r.Ended = scan.Cancelled, "the alignment stopped: "+final.Reason, e.now().UTC()
			}); err != nil {
				e.log.Warn("cannot store the end of an alignment scan", "scan", rec.ID, "err", err)
			}
		}
		return nil, fmt.Errorf("alignment, %s: scan %s ended %s: %s", what, rec.ID, final.State, final.Reason)
	}
	var pts []*goniodv1.Point
	err = e.store.ReadPoints(ctx, rec.ID, 0, 0, func(pt *goniodv1.Point) error {
		pts = append(pts, pt)
		return nil
	})
	return pts, err
}

// storeAlignment applies the offsets found and keeps them in the data directory.
func (e *Engine) storeAlignment(ctx context.Context, a *Alignment, log *slog.Logger) error {
	offsets := map[string]float64{}
	for _, o := range a.Offsets {
		offsets[o.Axis] = o.OffsetDeg
	}
	if err := e.ctl.SetZeroOffsets(offsets); err != nil {
		return fmt.Errorf("alignment not stored: %w", err)
	}
	a.Stored = true
	if err := e.store.SaveAlignment(a); err != nil {
		a.Stored = false
		return fmt.Errorf("%w: alignment applied but not kept: %w", ErrStorage, err)
	}
	if err := e.ctl.Refresh(ctx); err != nil {
		log.Warn("state refresh after the alignment", "err", err)
	}
	log.Info("alignment stored and applied", "offsets", offsets)
	return nil
}

// applyStoredAlignment applies the alignment kept in the data directory at start: it overrides the zero
// offsets of the configuration file.
func (e *Engine) applyStoredAlignment() error {
	var a Alignment
	found, err := e.store.LoadAlignment(&a)
	if err != nil || !found {
		return err
	}
	offsets := map[string]float64{}
	for _, o := range a.Offsets {
		offsets[o.Axis] = o.OffsetDeg
	}
	if err := e.ctl.SetZeroOffsets(offsets); err != nil {
		return fmt.Errorf("stored alignment of %s does not fit the instrument (align again, or remove %s): %w",
			a.Time.Format(time.RFC3339), e.store.AlignmentPath(), err)
	}
	e.log.Info("stored alignment applied (it overrides the configuration file's zero offsets)",
		"from", a.Time.Format(time.RFC3339), "offsets", offsets, "reference", a.Reference)
	return nil
}

func offsetOf(cfg *instrument.Config, axis string) float64 {
	a, _ := cfg.Axis(axis)
	return a.ZeroOffsetDeg
}

// round puts an angle on the grid of step, so that alignment scans start on round angles.
func round(deg, step float64) float64 { return math.Round(deg/step) * step }
