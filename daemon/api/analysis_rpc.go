package api

import (
	"context"
	"errors"
	"fmt"
	"math"

	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"

	"goniod/daemon/validate"
	goniodv1 "goniod/proto/goniod/v1"
	"goniod/xray"
	"goniod/xray/analysis"
)

func (s *AnalysisService) FindPeaks(ctx context.Context, req *goniodv1.FindPeaksRequest) (*goniodv1.PeaksResult, error) {
	var es validate.Errors
	opt := peakOptions(&es, req.GetSignificance(), req.GetShape())
	d := s.load(ctx, &es, "data", req.GetData(), req.GetSave())
	if err := es.Err(); err != nil {
		return nil, toStatus(err)
	}
	axis, sc, err := d.on(req.GetAxis(), d.moving)
	if err != nil {
		return nil, err
	}
	ps, err := analysis.FindPeaks(sc, opt)
	if err != nil {
		return nil, analysisStatus(err)
	}
	out := &goniodv1.PeaksResult{ScanId: d.id, Axis: axis, Shape: req.GetShape(), Peaks: d.peaksProto(ps.Peaks, axis)}
	if out.Shape == goniodv1.PeakShape_PEAK_SHAPE_UNSPECIFIED {
		out.Shape = goniodv1.PeakShape_PEAK_SHAPE_GAUSSIAN
	}
	if req.GetSave() {
		err = s.save(&goniodv1.SavedResult{ScanId: d.id, Kind: goniodv1.ResultKind_RESULT_KIND_PEAKS,
			Result: &goniodv1.SavedResult_Peaks{Peaks: out}}, d.id)
	}
	return out, toStatus(err)
}

func (s *AnalysisService) IdentifyLines(ctx context.Context, req *goniodv1.IdentifyLinesRequest) (*goniodv1.LinesResult, error) {
	var es validate.Errors
	opt := peakOptions(&es, req.GetSignificance(), goniodv1.PeakShape_PEAK_SHAPE_UNSPECIFIED)
	es.Range("tolerance_deg", req.GetToleranceDeg(), 0, 5, "°")
	if req.GetMaxOrder() > 20 {
		es.Add("max_order", "%d is outside the allowed range [0, 20] (0: every order the crystal reflects)", req.GetMaxOrder())
	}
	d := s.load(ctx, &es, "data", req.GetData(), req.GetSave())
	if err := es.Err(); err != nil {
		return nil, toStatus(err)
	}
	res, err := s.lines(d, req.GetAnode(), req.GetCrystal(), req.GetCrystalDNm(), opt,
		analysis.LineOptions{ToleranceDeg: req.GetToleranceDeg(), MaxOrder: int(req.GetMaxOrder())})
	if err != nil {
		return nil, err
	}
	if req.GetSave() {
		err = s.save(&goniodv1.SavedResult{ScanId: d.id, Kind: goniodv1.ResultKind_RESULT_KIND_LINES,
			Result: &goniodv1.SavedResult_Lines{Lines: res}}, d.id)
	}
	return res, toStatus(err)
}

// lines finds and identifies the lines of one data set on the crystal axis.
func (s *AnalysisService) lines(d *dataset, anodeName, crystal string, dNM float64, po analysis.PeakOptions, lo analysis.LineOptions) (*goniodv1.LinesResult, error) {
	var es validate.Errors
	anode := d.anodeOr(&es, "anode", anodeName)
	dNM = d.spacingOr(&es, crystal, dNM)
	if err := es.Err(); err != nil {
		return nil, toStatus(err)
	}
	axis, sc, err := d.on("", s.crystalAxis(d))
	if err != nil {
		return nil, err
	}
	ps, err := analysis.FindPeaks(sc, po)
	if err != nil {
		return nil, analysisStatus(err)
	}
	ls, err := analysis.IdentifyLines(sc, ps, anode, dNM, lo)
	if err != nil {
		return nil, analysisStatus(err)
	}
	d.dNM = dNM
	out := &goniodv1.LinesResult{ScanId: d.id, Anode: anode.Symbol, CrystalDNm: dNM, Unmatched: d.peaksProto(ls.Unmatched, axis)}
	for _, m := range ls.Matches {
		out.Matches = append(out.Matches, &goniodv1.LineMatch{Peak: d.peakProto(m.Peak, axis), Line: m.Line.Name,
			Order: uint32(m.Order), ExpectedDeg: m.ExpectedDeg, ResidualDeg: m.ResidualDeg, LineEnergyKev: m.Line.EnergyKeV})
	}
	return out, nil
}

func (s *AnalysisService) FitLattice(ctx context.Context, req *goniodv1.FitLatticeRequest) (*goniodv1.LatticeResult, error) {
	var es validate.Errors
	angleErr := req.GetAngleErrDeg()
	if angleErr == 0 {
		angleErr = analysis.DefaultAngleErrDeg
	}
	es.Range("angle_err_deg", angleErr, 0, 10, "°")
	if len(req.GetData()) == 0 && len(req.GetReflections()) == 0 {
		es.Add("data", "missing: give scans (data) or reflections")
	}
	if len(req.GetData()) > 100 {
		es.Add("data", "%d data sets is more than the maximum of 100", len(req.GetData()))
	}
	var refl []analysis.Reflection
	for i, r := range req.GetReflections() {
		f := fmt.Sprintf("reflections[%d]", i)
		okT := es.Range(f+".theta_deg", r.GetThetaDeg(), 0, 90, "°")
		okL := es.Range(f+".wavelength_nm", r.GetWavelengthNm(), 1e-4, 100, " nm")
		if r.GetOrder() < 1 || r.GetOrder() > 20 {
			es.Add(f+".order", "%d is outside the allowed range [1, 20]", r.GetOrder())
		} else if okT && okL {
			refl = append(refl, analysis.Reflection{ThetaDeg: r.GetThetaDeg(), Order: int(r.GetOrder()), WavelengthNM: r.GetWavelengthNm()})
		}
	}
	var sets []*dataset
	for i, ps := range req.GetData() {
		sets = append(sets, s.load(ctx, &es, fmt.Sprintf("data[%d]", i), ps, req.GetSave()))
	}
	if err := es.Err(); err != nil {
		return nil, toStatus(err)
	}
	for _, d := range sets {
		ls, err := s.lines(d, req.GetAnode(), "", 0, analysis.PeakOptions{}, analysis.LineOptions{})
		if err != nil {
			return nil, err
		}
		for _, m := range ls.GetMatches() {
			refl = append(refl, analysis.Reflection{ThetaDeg: m.GetPeak().GetCentreDeg().GetValue(), ThetaErrDeg: m.GetPeak().GetCentreDeg().GetErr(),
				Order: int(m.GetOrder()), WavelengthNM: xray.HCkeVnm / m.GetLineEnergyKev()})
		}
	}
	lat, err := analysis.FitLattice(refl, angleErr)
	if err != nil {
		return nil, analysisStatus(err)
	}
	out := &goniodv1.LatticeResult{DNm: &goniodv1.Value{Value: lat.D.Value, Err: lat.D.Err}, ReducedChi2: lat.ReducedChi2,
		ResidualsNm: lat.Residuals}
	for _, r := range lat.Used {
		out.Used = append(out.Used, &goniodv1.Reflection{ThetaDeg: r.ThetaDeg, Order: uint32(r.Order), WavelengthNm: r.WavelengthNM})
	}
	if req.GetSave() {
		err = s.saveAll(sets, &goniodv1.SavedResult{Kind: goniodv1.ResultKind_RESULT_KIND_LATTICE,
			Result: &goniodv1.SavedResult_Lattice{Lattice: out}})
	}
	return out, toStatus(err)
}

func (s *AnalysisService) MeasureWidth(ctx context.Context, req *goniodv1.MeasureWidthRequest) (*goniodv1.WidthResult, error) {
	var es validate.Errors
	opt := peakOptions(&es, 0, req.GetShape())
	d := s.load(ctx, &es, "data", req.GetData(), req.GetSave())
	if err := es.Err(); err != nil {
		return nil, toStatus(err)
	}
	axis, sc, err := d.on(req.GetAxis(), d.moving)
	if err != nil {
		return nil, err
	}
	w, err := analysis.MeasureWidth(sc, opt)
	if err != nil {
		return nil, analysisStatus(err)
	}
	out := &goniodv1.WidthResult{ScanId: d.id, Axis: axis, CentreDeg: valueProto(w.Peak.Centre),
		FwhmFitDeg: valueProto(w.FWHMFit), FwhmInterpDeg: valueProto(w.FWHMInterp), ReducedChi2: w.Peak.ReducedChi2}
	if req.GetSave() {
		err = s.save(&goniodv1.SavedResult{ScanId: d.id, Kind: goniodv1.ResultKind_RESULT_KIND_WIDTH,
			Result: &goniodv1.SavedResult_Width{Width: out}}, d.id)
	}
	return out, toStatus(err)
}

func (s *AnalysisService) FitLimit(ctx context.Context, req *goniodv1.FitLimitRequest) (*goniodv1.LimitResult, error) {
	var es validate.Errors
	if n := len(req.GetData()); n == 0 || n > 100 {
		es.Add("data", "%d data sets: give 1 to 100 scans, one per tube voltage", n)
	}
	var sets []*dataset
	for i, ps := range req.GetData() {
		sets = append(sets, s.load(ctx, &es, fmt.Sprintf("data[%d]", i), ps, req.GetSave()))
	}
	if err := es.Err(); err != nil {
		return nil, toStatus(err)
	}
	out := &goniodv1.LimitResult{}
	var limits []analysis.Limit
	for i, d := range sets {
		field := fmt.Sprintf("data[%d]", i)
		d.spacingOr(&es, "", 0)
		if d.kv <= 0 {
			es.Add(field, "the points carry no tube voltage (high voltage was off)")
		}
		if err := es.Err(); err != nil {
			return nil, toStatus(err)
		}
		_, sc, err := d.on("", s.crystalAxis(d))
		if err != nil {
			return nil, err
		}
		l, err := analysis.DuaneHunt(sc, d.dNM, d.kv)
		if err != nil {
			return nil, analysisStatus(fmt.Errorf("%s (%g kV): %w", field, d.kv, err))
		}
		limits = append(limits, l)
		out.Limits = append(out.Limits, &goniodv1.VoltageLimit{ScanId: d.id, Kv: d.kv, ThetaDeg: valueProto(l.Theta),
			WavelengthNm: valueProto(l.Wavelength)})
	}
	if distinctKV(limits) >= 2 {
		p, err := analysis.PlanckFromLimits(limits)
		if err != nil {
			return nil, analysisStatus(err)
		}
		out.PlanckJs, out.ReducedChi2 = valueProto(p.H), p.ReducedChi2
	}
	var err error
	if req.GetSave() {
		err = s.saveAll(sets, &goniodv1.SavedResult{Kind: goniodv1.ResultKind_RESULT_KIND_LIMIT,
			Result: &goniodv1.SavedResult_Limit{Limit: out}})
	}
	return out, toStatus(err)
}

func distinctKV(ls []analysis.Limit) int {
	seen := map[float64]bool{}
	for _, l := range ls {
		seen[math.Round(l.KV*100)] = true
	}
	return len(seen)
}

func valueProto(v analysis.Value) *goniodv1.Value { return &goniodv1.Value{Value: v.Value, Err: v.Err} }

// peakOptions checks the options every peak search takes.
func peakOptions(es *validate.Errors, significance float64, shape goniodv1.PeakShape) analysis.PeakOptions {
	o := analysis.PeakOptions{Significance: significance}
	if significance != 0 {
		es.Range("significance", significance, 1, 100, "σ")
	}
	switch shape {
	case goniodv1.PeakShape_PEAK_SHAPE_UNSPECIFIED, goniodv1.PeakShape_PEAK_SHAPE_GAUSSIAN:
		o.Shape = analysis.Gaussian
	case goniodv1.PeakShape_PEAK_SHAPE_LORENTZIAN:
		o.Shape = analysis.Lorentzian
	case goniodv1.PeakShape_PEAK_SHAPE_PSEUDO_VOIGT:
		o.Shape = analysis.PseudoVoigt
	default:
		es.Add("shape", "%v is not a known shape: use gaussian, lorentzian or pseudo-voigt", shape)
	}
	return o
}

// analysisStatus maps the analysis errors: unusable data is the caller's to fix (InvalidArgument on "data");
// a measurement the data cannot give (no peak, a fit that does not settle) is FailedPrecondition.
func analysisStatus(err error) error {
	switch {
	case errors.Is(err, analysis.ErrData):
		var es validate.Errors
		es.Add("data", "%v", err)
		return toStatus(es)
	case errors.Is(err, analysis.ErrNoPeak), errors.Is(err, analysis.ErrFitSingular), errors.Is(err, analysis.ErrFitInput):
		return status.Error(codes.FailedPrecondition, err.Error())
	}
	return toStatus(err)
}
