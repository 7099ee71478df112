package api

import (
	"context"
	"fmt"
	"math"
	"time"

	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"
	"google.golang.org/protobuf/encoding/protojson"
	"google.golang.org/protobuf/types/known/timestamppb"

	"goniod/daemon/scan"
	"goniod/daemon/validate"
	goniodv1 "goniod/proto/goniod/v1"
	"goniod/xray"
	"goniod/xray/analysis"
)

// dataset is the points of one PointSet, ready to become an analysis.Scan on any of its axes.
type dataset struct {
	id      string // stored scan, empty for inline points
	moving  string // axis the scan moved (default abscissa)
	crystal string
	dNM     float64
	anode   string
	dead    analysis.DeadTime
	kv      float64 // mean tube voltage of the points with high voltage on
	angles  map[string][]float64
	counts  []float64
	dwell   []float64
}

// load reads a PointSet; problems are added to es under field.
func (s *AnalysisService) load(ctx context.Context, es *validate.Errors, field string, ps *goniodv1.PointSet, save bool) *dataset {
	d := &dataset{angles: map[string][]float64{}}
	var kvSum float64
	var kvN int
	add := func(p *goniodv1.Point) error {
		for _, a := range p.GetAxes() {
			d.angles[a.GetName()] = append(d.angles[a.GetName()], a.GetActualDeg())
		}
		d.counts = append(d.counts, float64(p.GetCounts()))
		d.dwell = append(d.dwell, p.GetDwellS())
		if p.GetTubeKv() > 0 {
			kvSum, kvN = kvSum+p.GetTubeKv(), kvN+1
		}
		return nil
	}
	switch src := ps.GetSource().(type) {
	case *goniodv1.PointSet_ScanId:
		d.id = src.ScanId
		if s.Scans == nil {
			es.Add(field+".scan_id", "this daemon keeps no scans; send the points inline")
			return d
		}
		rec, err := s.Scans.Get(d.id)
		if err != nil {
			es.Add(field+".scan_id", "%v", err)
			return d
		}
		d.crystal, d.dNM, d.anode = rec.Info.Crystal, rec.Info.CrystalDNM, rec.Info.Anode
		d.dead = analysis.DeadTime{Tau: rec.Info.DeadTime.Seconds()}
		if rec.Info.Paralyzable {
			d.dead.Model = xray.Paralyzable
		}
		d.moving = s.crystalAxisOf(rec.Info.Axes)
		if (rec.Request.Kind == scan.Coupled || rec.Request.Kind == scan.AxisOnly) && rec.Request.Axis != "" {
			d.moving = rec.Request.Axis
		}
		if err := s.Scans.ReadPoints(ctx, d.id, 0, 0, add); err != nil {
			es.Add(field+".scan_id", "reading points: %v", err)
		}
	case *goniodv1.PointSet_Inline:
		in := src.Inline
		if save {
			es.Add("save", "needs a stored scan (scan_id), not inline points")
		}
		d.crystal, d.dNM, d.anode = in.GetCrystal(), in.GetCrystalDNm(), in.GetAnode()
		if es.Range(field+".inline.dead_time_s", in.GetDeadTimeS(), 0, 0.01, " s") {
			d.dead.Tau = in.GetDeadTimeS()
		}
		for i, p := range in.GetPoints() {
			if !es.Range(fmt.Sprintf("%s.inline.points[%d].dwell_s", field, i), p.GetDwellS(), 1e-6, 1e6, " s") {
				return d
			}
			if err := add(p); err != nil {
				return d
			}
		}
		if pts := in.GetPoints(); len(pts) > 0 {
			var names []string
			for _, a := range pts[0].GetAxes() {
				names = append(names, a.GetName())
			}
			d.moving = s.crystalAxisOf(names)
		}
	default:
		es.Add(field, "missing: give scan_id or inline points")
		return d
	}
	if len(d.counts) < analysis.MinPoints {
		es.Add(field, "%d points; an analysis needs at least %d", len(d.counts), analysis.MinPoints)
	}
	for name, v := range d.angles {
		if len(v) != len(d.counts) {
			es.Add(field, "axis %q is missing from some points", name)
		}
	}
	if kvN > 0 {
		d.kv = kvSum / float64(kvN)
	}
	return d
}

// crystalAxis is the axis Bragg analyses use for d.
func (s *AnalysisService) crystalAxis(d *dataset) string {
	names := make([]string, 0, len(d.angles))
	for n := range d.angles {
		names = append(names, n)
	}
	return s.crystalAxisOf(names)
}

// crystalAxisOf picks the configured crystal axis ("theta" by default) when the points have it, else the
// first axis.
func (s *AnalysisService) crystalAxisOf(axes []string) string {
	want := s.CrystalAxis
	if want == "" {
		want = "theta"
	}
	for _, a := range axes {
		if a == want {
			return a
		}
	}
	if len(axes) > 0 {
		return axes[0]
	}
	return want
}

// axisOr returns the named axis (or def when name is empty), checking the points have it.
func (d *dataset) axisOr(name, def string) (string, error) {
	if name == "" {
		name = def
	}
	if _, ok := d.angles[name]; !ok {
		var es validate.Errors
		names := make([]string, 0, len(d.angles))
		for n := range d.angles {
			names = append(names, n)
		}
		es.Add("axis", "the points have no axis %q; they have %v", name, names)
		return "", es
	}
	return name, nil
}

// scan prepares the analysis scan on one axis.
func (d *dataset) scan(axis string) (*analysis.Scan, error) {
	return analysis.NewScan(d.angles[axis], d.counts, d.dwell, d.dead)
}

// on picks the abscissa (the named axis, or def when name is empty) and prepares the analysis scan on it;
// errors are gRPC status errors.
func (d *dataset) on(name, def string) (string, *analysis.Scan, error) {
	axis, err := d.axisOr(name, def)
	if err != nil {
		return "", nil, toStatus(err)
	}
	sc, err := d.scan(axis)
	if err != nil {
		return "", nil, analysisStatus(err)
	}
	return axis, sc, nil
}

// anodeOr resolves the anode: the request's, else the data's.
func (d *dataset) anodeOr(es *validate.Errors, field, name string) xray.Anode {
	if name == "" {
		name = d.anode
	}
	if name == "" {
		es.Add(field, "missing: the scan does not say which anode; give one of %v", xray.AnodeSymbols())
		return xray.Anode{}
	}
	a, err := xray.LookupAnode(name)
	if err != nil {
		es.Add(field, "%v", err)
	}
	return a
}

// spacingOr resolves the crystal d-spacing: a crystal name or spacing from the request, else the data's.
func (d *dataset) spacingOr(es *validate.Errors, crystal string, dNM float64) float64 {
	switch {
	case crystal != "":
		c, err := xray.LookupCrystal(crystal)
		if err != nil {
			es.Add("crystal", "%v", err)
		}
		d.dNM = c.DNM
	case dNM != 0:
		if es.Range("crystal_d_nm", dNM, 0.01, 100, " nm") {
			d.dNM = dNM
		}
	case d.dNM == 0 && d.crystal != "":
		c, err := xray.LookupCrystal(d.crystal)
		if err != nil {
			es.Add("crystal", "%v", err)
		}
		d.dNM = c.DNM
	case d.dNM == 0:
		es.Add("crystal_d_nm", "missing: the data do not say which crystal; give crystal_d_nm or crystal")
	}
	return d.dNM
}

func (d *dataset) peaksProto(ps []analysis.Peak, axis string) []*goniodv1.Peak {
	out := make([]*goniodv1.Peak, 0, len(ps))
	for _, p := range ps {
		out = append(out, d.peakProto(p, axis))
	}
	return out
}

// peakProto maps a peak; on the crystal axis with a known spacing it carries the first-order wavelength and
// energy of its centre.
func (d *dataset) peakProto(p analysis.Peak, axis string) *goniodv1.Peak {
	out := &goniodv1.Peak{CentreDeg: valueProto(p.Centre), FwhmDeg: valueProto(p.FWHM), Area: valueProto(p.Area),
		HeightCps: p.Height, BackgroundCps: p.Background, Significance: p.Significance,
		ReducedChi2: p.ReducedChi2, Group: uint32(p.Group)}
	if d.dNM > 0 && axis == d.moving && p.Centre.Value > 0 && p.Centre.Value < 90 {
		wl := xray.WavelengthNM(p.Centre.Value, d.dNM, 1)
		e := xray.EnergyKeV(wl)
		out.WavelengthNm, out.EnergyKev = &wl, &e
	}
	if math.IsNaN(out.ReducedChi2) {
		out.ReducedChi2 = 0
	}
	return out
}

var resultKinds = map[goniodv1.ResultKind]string{
	goniodv1.ResultKind_RESULT_KIND_PEAKS: "peaks", goniodv1.ResultKind_RESULT_KIND_LINES: "lines",
	goniodv1.ResultKind_RESULT_KIND_LATTICE: "lattice", goniodv1.ResultKind_RESULT_KIND_WIDTH: "width",
	goniodv1.ResultKind_RESULT_KIND_LIMIT: "limit",
}

// save stores a result beside the scan id, as protojson.
func (s *AnalysisService) save(r *goniodv1.SavedResult, id string) error {
	if s.Results == nil {
		return status.Error(codes.FailedPrecondition, "this daemon keeps no results")
	}
	now := time.Now
	if s.Now != nil {
		now = s.Now
	}
	r.ScanId, r.Saved = id, timestamppb.New(now())
	b, err := protojson.Marshal(r)
	if err != nil {
		return err
	}
	return s.Results.SaveResult(id, resultKinds[r.Kind], b)
}

// saveAll stores a result computed from several scans beside each of them.
func (s *AnalysisService) saveAll(sets []*dataset, r *goniodv1.SavedResult) error {
	for _, d := range sets {
		if err := s.save(r, d.id); err != nil {
			return err
		}
	}
	return nil
}

func (s *AnalysisService) GetSavedResult(_ context.Context, req *goniodv1.GetSavedResultRequest) (*goniodv1.SavedResult, error) {
	var es validate.Errors
	kind, ok := resultKinds[req.GetKind()]
	if !ok {
		es.Add("kind", "%v: use peaks, lines, lattice, width or limit", req.GetKind())
	}
	if req.GetScanId() == "" {
		es.Add("scan_id", "missing")
	}
	if err := es.Err(); err != nil {
		return nil, toStatus(err)
	}
	if s.Results == nil || s.Scans == nil {
		return nil, status.Error(codes.FailedPrecondition, "this daemon keeps no results")
	}
	// Only scans the daemon knows have results: the ID never reaches the file system unchecked.
	if _, err := s.Scans.Get(req.GetScanId()); err != nil {
		return nil, toStatus(err)
	}
	b, err := s.Results.LoadResult(req.GetScanId(), kind)
	if err != nil {
		return nil, toStatus(err)
	}
	out := &goniodv1.SavedResult{}
	if err := protojson.Unmarshal(b, out); err != nil {
		return nil, status.Errorf(codes.DataLoss, "saved %s result of %s: %v", kind, req.GetScanId(), err)
	}
	return out, nil
}
