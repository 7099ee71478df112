package client

import (
	"context"
	"time"

	goniodv1 "goniod/proto/goniod/v1"
)

// Value is a measured quantity with its standard error.
type Value struct {
	Value float64 `json:"value"`
	Err   float64 `json:"err"`
}

// Shape is the profile peaks are fitted with: "gaussian" (default), "lorentzian" or "pseudo-voigt".
type Shape string

// Peak is one fitted peak; rates are dead-time-corrected counts per second.
type Peak struct {
	CentreDeg Value `json:"centre_deg"`
	FWHMDeg   Value `json:"fwhm_deg"`
	// Area above the background, (counts/s)·degree.
	Area         Value   `json:"area"`
	Height       float64 `json:"height_cps"`
	Background   float64 `json:"background_cps"`
	Significance float64 `json:"significance"`
	ReducedChi2  float64 `json:"reduced_chi2"`
	WavelengthNM float64 `json:"wavelength_nm,omitempty"`
	EnergyKeV    float64 `json:"energy_kev,omitempty"`
	Group        int     `json:"group"`
}

// Peaks is the result of a peak search.
type Peaks struct {
	ScanID string `json:"scan_id,omitempty"`
	Axis   string `json:"axis"`
	Shape  Shape  `json:"shape"`
	Peaks  []Peak `json:"peaks"`
}

// LineMatch is a peak identified as an emission line in a diffraction order.
type LineMatch struct {
	Peak          Peak    `json:"peak"`
	Line          string  `json:"line"`
	Order         int     `json:"order"`
	ExpectedDeg   float64 `json:"expected_deg"`
	ResidualDeg   float64 `json:"residual_deg"`
	LineEnergyKeV float64 `json:"line_energy_kev"`
}

// Lines is the result of a line identification.
type Lines struct {
	ScanID     string      `json:"scan_id,omitempty"`
	Anode      string      `json:"anode"`
	CrystalDNM float64     `json:"crystal_d_nm"`
	Matches    []LineMatch `json:"matches"`
	Unmatched  []Peak      `json:"unmatched"`
}

// Reflection is a Bragg reflection: crystal angle, order, wavelength.
type Reflection struct {
	ThetaDeg     float64 `json:"theta_deg"`
	Order        int     `json:"order"`
	WavelengthNM float64 `json:"wavelength_nm"`
}

// Lattice is a fitted lattice spacing.
type Lattice struct {
	DNM         Value        `json:"d_nm"`
	ReducedChi2 float64      `json:"reduced_chi2"`
	Used        []Reflection `json:"used"`
	ResidualsNM []float64    `json:"residuals_nm"`
}

// Width is the width of the strongest peak of a scan.
type Width struct {
	ScanID        string  `json:"scan_id,omitempty"`
	Axis          string  `json:"axis"`
	CentreDeg     Value   `json:"centre_deg"`
	FWHMFitDeg    Value   `json:"fwhm_fit_deg"`
	FWHMInterpDeg Value   `json:"fwhm_interp_deg"`
	ReducedChi2   float64 `json:"reduced_chi2"`
}

// VoltageLimit is the short-wavelength limit of one scan.
type VoltageLimit struct {
	ScanID       string  `json:"scan_id"`
	KV           float64 `json:"kv"`
	ThetaDeg     Value   `json:"theta_deg"`
	WavelengthNM Value   `json:"wavelength_nm"`
}

// Limits are the short-wavelength limits of a voltage series and, with two or more voltages, Planck's constant.
type Limits struct {
	Limits      []VoltageLimit `json:"limits"`
	PlanckJs    *Value         `json:"planck_js,omitempty"`
	ReducedChi2 float64        `json:"reduced_chi2"`
}

// ResultKind names a saved analysis result.
type ResultKind string

// Saved result kinds.
const (
	PeaksResult   ResultKind = "peaks"
	LinesResult   ResultKind = "lines"
	LatticeResult ResultKind = "lattice"
	WidthResult   ResultKind = "width"
	LimitResult   ResultKind = "limit"
)

// SavedResult is a result saved beside a scan; exactly one of the result fields is set.
type SavedResult struct {
	ScanID  string     `json:"scan_id"`
	Kind    ResultKind `json:"kind"`
	Saved   time.Time  `json:"saved"`
	Peaks   *Peaks     `json:"peaks,omitempty"`
	Lines   *Lines     `json:"lines,omitempty"`
	Lattice *Lattice   `json:"lattice,omitempty"`
	Width   *Width     `json:"width,omitempty"`
	Limits  *Limits    `json:"limit,omitempty"`
}

// PeakOptions steer a peak search. Zero values take the daemon's defaults (5σ, Gaussian, the moving axis).
type PeakOptions struct {
	Axis         string
	Significance float64
	Shape        Shape
	Save         bool
}

// LineOptions steer a line identification; empty anode and crystal take the scan's.
type LineOptions struct {
	Anode, Crystal string
	CrystalDNM     float64
	ToleranceDeg   float64
	MaxOrder       int
	Significance   float64
	Save           bool
}

// LatticeOptions steer a lattice fit; AngleErrDeg 0 means the daemon's default (0.1°).
type LatticeOptions struct {
	Anode       string
	AngleErrDeg float64
	Save        bool
}

func stored(id string) *goniodv1.PointSet {
	return &goniodv1.PointSet{Source: &goniodv1.PointSet_ScanId{ScanId: id}}
}

var shapeProto = map[Shape]goniodv1.PeakShape{
	"": goniodv1.PeakShape_PEAK_SHAPE_UNSPECIFIED, "gaussian": goniodv1.PeakShape_PEAK_SHAPE_GAUSSIAN,
	"lorentzian": goniodv1.PeakShape_PEAK_SHAPE_LORENTZIAN, "pseudo-voigt": goniodv1.PeakShape_PEAK_SHAPE_PSEUDO_VOIGT,
}

func shapeOf(s Shape) goniodv1.PeakShape {
	if p, ok := shapeProto[s]; ok {
		return p
	}
	return goniodv1.PeakShape(-1) // refused by the daemon with a field error naming the shapes
}

func shapeName(p goniodv1.PeakShape) Shape {
	for k, v := range shapeProto {
		if v == p && k != "" {
			return k
		}
	}
	return "gaussian"
}

// FindPeaks searches a stored scan for peaks and fits them.
func (c *Client) FindPeaks(ctx context.Context, id string, o PeakOptions) (Peaks, error) {
	r, err := unary(ctx, c, !o.Save, func(ctx context.Context) (*goniodv1.PeaksResult, error) {
		return c.analysis.FindPeaks(ctx, &goniodv1.FindPeaksRequest{Data: stored(id), Axis: o.Axis,
			Significance: o.Significance, Shape: shapeOf(o.Shape), Save: o.Save})
	})
	if err != nil {
		return Peaks{}, err
	}
	return peaksFromProto(r), nil
}

// IdentifyLines finds the peaks of a stored scan on the crystal axis and names their lines and orders.
func (c *Client) IdentifyLines(ctx context.Context, id string, o LineOptions) (Lines, error) {
	r, err := unary(ctx, c, !o.Save, func(ctx context.Context) (*goniodv1.LinesResult, error) {
		return c.analysis.IdentifyLines(ctx, &goniodv1.IdentifyLinesRequest{Data: stored(id), Anode: o.Anode,
			CrystalDNm: o.CrystalDNM, Crystal: o.Crystal, ToleranceDeg: o.ToleranceDeg, MaxOrder: uint32(max(o.MaxOrder, 0)),
			Significance: o.Significance, Save: o.Save})
	})
	if err != nil {
		return Lines{}, err
	}
	return linesFromProto(r), nil
}

// FitLattice fits the lattice spacing from the identified lines of stored scans and from reflections given
// directly (either may be empty, not both).
func (c *Client) FitLattice(ctx context.Context, ids []string, refl []Reflection, o LatticeOptions) (Lattice, error) {
	req := &goniodv1.FitLatticeRequest{AngleErrDeg: o.AngleErrDeg, Anode: o.Anode, Save: o.Save}
	for _, id := range ids {
		req.Data = append(req.Data, stored(id))
	}
	for _, r := range refl {
		req.Reflections = append(req.Reflections, &goniodv1.Reflection{ThetaDeg: r.ThetaDeg, Order: uint32(max(r.Order, 0)), WavelengthNm: r.WavelengthNM})
	}
	r, err := unary(ctx, c, !o.Save, func(ctx context.Context) (*goniodv1.LatticeResult, error) {
		return c.analysis.FitLattice(ctx, req)
	})
	if err != nil {
		return Lattice{}, err
	}
	return latticeFromProto(r), nil
}

// MeasureWidth measures the strongest peak of a stored scan (a rocking curve) by fit and by interpolation.
func (c *Client) MeasureWidth(ctx context.Context, id string, o PeakOptions) (Width, error) {
	r, err := unary(ctx, c, !o.Save, func(ctx context.Context) (*goniodv1.WidthResult, error) {
		return c.analysis.MeasureWidth(ctx, &goniodv1.MeasureWidthRequest{Data: stored(id), Axis: o.Axis, Shape: shapeOf(o.Shape), Save: o.Save})
	})
	if err != nil {
		return Width{}, err
	}
	return widthFromProto(r), nil
}

// FitLimit finds the short-wavelength limit of each stored scan (one per tube voltage) and, from two or more
// voltages, Planck's constant.
func (c *Client) FitLimit(ctx context.Context, ids []string, save bool) (Limits, error) {
	req := &goniodv1.FitLimitRequest{Save: save}
	for _, id := range ids {
		req.Data = append(req.Data, stored(id))
	}
	r, err := unary(ctx, c, !save, func(ctx context.Context) (*goniodv1.LimitResult, error) {
		return c.analysis.FitLimit(ctx, req)
	})
	if err != nil {
		return Limits{}, err
	}
	return limitsFromProto(r), nil
}

var kindProto = map[ResultKind]goniodv1.ResultKind{
	PeaksResult: goniodv1.ResultKind_RESULT_KIND_PEAKS, LinesResult: goniodv1.ResultKind_RESULT_KIND_LINES,
	LatticeResult: goniodv1.ResultKind_RESULT_KIND_LATTICE, WidthResult: goniodv1.ResultKind_RESULT_KIND_WIDTH,
	LimitResult: goniodv1.ResultKind_RESULT_KIND_LIMIT,
}

// SavedResult fetches a result saved beside a scan by an earlier call.
func (c *Client) SavedResult(ctx context.Context, id string, kind ResultKind) (SavedResult, error) {
	r, err := unary(ctx, c, true, func(ctx context.Context) (*goniodv1.SavedResult, error) {
		return c.analysis.GetSavedResult(ctx, &goniodv1.GetSavedResultRequest{ScanId: id, Kind: kindProto[kind]})
	})
	if err != nil {
		return SavedResult{}, err
	}
	out := SavedResult{ScanID: r.GetScanId(), Kind: kind}
	if r.Saved != nil {
		out.Saved = r.Saved.AsTime()
	}
	switch v := r.Result.(type) {
	case *goniodv1.SavedResult_Peaks:
		p := peaksFromProto(v.Peaks)
		out.Peaks = &p
	case *goniodv1.SavedResult_Lines:
		l := linesFromProto(v.Lines)
		out.Lines = &l
	case *goniodv1.SavedResult_Lattice:
		l := latticeFromProto(v.Lattice)
		out.Lattice = &l
	case *goniodv1.SavedResult_Width:
		w := widthFromProto(v.Width)
		out.Width = &w
	case *goniodv1.SavedResult_Limit:
		l := limitsFromProto(v.Limit)
		out.Limits = &l
	}
	return out, nil
}

func valueOf(v *goniodv1.Value) Value { return Value{Value: v.GetValue(), Err: v.GetErr()} }

func peakFromProto(p *goniodv1.Peak) Peak {
	return Peak{CentreDeg: valueOf(p.GetCentreDeg()), FWHMDeg: valueOf(p.GetFwhmDeg()), Area: valueOf(p.GetArea()),
		Height: p.GetHeightCps(), Background: p.GetBackgroundCps(), Significance: p.GetSignificance(),
		ReducedChi2: p.GetReducedChi2(), WavelengthNM: p.GetWavelengthNm(), EnergyKeV: p.GetEnergyKev(), Group: int(p.GetGroup())}
}

func peaksOf(ps []*goniodv1.Peak) []Peak {
	out := make([]Peak, 0, len(ps))
	for _, p := range ps {
		out = append(out, peakFromProto(p))
	}
	return out
}

func peaksFromProto(r *goniodv1.PeaksResult) Peaks {
	return Peaks{ScanID: r.GetScanId(), Axis: r.GetAxis(), Shape: shapeName(r.GetShape()), Peaks: peaksOf(r.GetPeaks())}
}

func linesFromProto(r *goniodv1.LinesResult) Lines {
	out := Lines{ScanID: r.GetScanId(), Anode: r.GetAnode(), CrystalDNM: r.GetCrystalDNm(), Unmatched: peaksOf(r.GetUnmatched()),
		Matches: []LineMatch{}}
	for _, m := range r.GetMatches() {
		out.Matches = append(out.Matches, LineMatch{Peak: peakFromProto(m.GetPeak()), Line: m.GetLine(), Order: int(m.GetOrder()),
			ExpectedDeg: m.GetExpectedDeg(), ResidualDeg: m.GetResidualDeg(), LineEnergyKeV: m.GetLineEnergyKev()})
	}
	return out
}

func latticeFromProto(r *goniodv1.LatticeResult) Lattice {
	out := Lattice{DNM: valueOf(r.GetDNm()), ReducedChi2: r.GetReducedChi2(), ResidualsNM: r.GetResidualsNm()}
	for _, u := range r.GetUsed() {
		out.Used = append(out.Used, Reflection{ThetaDeg: u.GetThetaDeg(), Order: int(u.GetOrder()), WavelengthNM: u.GetWavelengthNm()})
	}
	return out
}

func widthFromProto(r *goniodv1.WidthResult) Width {
	return Width{ScanID: r.GetScanId(), Axis: r.GetAxis(), CentreDeg: valueOf(r.GetCentreDeg()), FWHMFitDeg: valueOf(r.GetFwhmFitDeg()),
		FWHMInterpDeg: valueOf(r.GetFwhmInterpDeg()), ReducedChi2: r.GetReducedChi2()}
}

func limitsFromProto(r *goniodv1.LimitResult) Limits {
	out := Limits{ReducedChi2: r.GetReducedChi2()}
	for _, l := range r.GetLimits() {
		out.Limits = append(out.Limits, VoltageLimit{ScanID: l.GetScanId(), KV: l.GetKv(), ThetaDeg: valueOf(l.GetThetaDeg()),
			WavelengthNM: valueOf(l.GetWavelengthNm())})
	}
	if r.PlanckJs != nil {
		v := valueOf(r.PlanckJs)
		out.PlanckJs = &v
	}
	return out
}
