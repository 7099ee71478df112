package api

import (
	"context"
	"fmt"
	"time"

	"goniod/daemon/scan"
	"goniod/daemon/validate"
	goniodv1 "goniod/proto/goniod/v1"
	"goniod/xray"
)

// ScanReader gives the analysis stored scans (the engine).
type ScanReader interface {
	Get(id string) (scan.Record, error)
	ReadPoints(ctx context.Context, id string, from, limit int, fn func(*goniodv1.Point) error) error
}

// ResultStore keeps analysis results beside their scans (the store).
type ResultStore interface {
	SaveResult(id, kind string, b []byte) error
	LoadResult(id, kind string) ([]byte, error)
}

// AnalysisService implements goniod.v1.Analysis: conversions, and the analyses of package xray/analysis on
// stored scans or inline points, with results saved beside the scan on request.
type AnalysisService struct {
	goniodv1.UnimplementedAnalysisServer
	// Scans and Results may be nil: then only inline points can be analysed and nothing saved.
	Scans   ScanReader
	Results ResultStore
	// CrystalAxis names the axis that turns the analyzer crystal (default "theta"): Bragg analyses use it.
	CrystalAxis string
	// Now is the clock of saved results (default time.Now).
	Now func() time.Time
}

var _ goniodv1.AnalysisServer = (*AnalysisService)(nil)

// maxConvert bounds the values of one Convert call.
const maxConvert = 100_000

func (s *AnalysisService) Convert(_ context.Context, req *goniodv1.ConvertRequest) (*goniodv1.ConvertResponse, error) {
	var es validate.Errors
	d := req.GetCrystalDNm()
	switch {
	case req.GetCrystal() != "":
		c, err := xray.LookupCrystal(req.GetCrystal())
		if err != nil {
			es.Add("crystal", "%v", err)
		}
		d = c.DNM
	case d == 0:
		es.Add("crystal_d_nm", "missing: give crystal_d_nm or crystal")
	default:
		es.Range("crystal_d_nm", d, 0.01, 100, " nm")
	}
	order := int(req.GetOrder())
	if order == 0 {
		order = 1
	}
	if err := xray.ValidateOrder(order); err != nil {
		es.Add("order", "%v", err)
	}
	es.Range("theta_offset_deg", req.GetThetaOffsetDeg(), -10, 10, "°")
	if n := len(req.GetThetaDeg()) + len(req.GetWavelengthNm()); n > maxConvert {
		es.Add("theta_deg", "%d values is more than the maximum of %d", n, maxConvert)
	}
	if err := es.Err(); err != nil {
		return nil, toStatus(err)
	}
	out := &goniodv1.ConvertResponse{CrystalDNm: d, Order: uint32(order)}
	for i, th := range req.GetThetaDeg() {
		t := th - req.GetThetaOffsetDeg()
		if !es.Range(fmt.Sprintf("theta_deg[%d]", i), t, 0, 90, "°") {
			continue
		}
		wl := xray.WavelengthNM(t, d, order)
		out.Conversions = append(out.Conversions, &goniodv1.Conversion{ThetaDeg: th, WavelengthNm: wl, EnergyKev: xray.EnergyKeV(wl)})
	}
	for i, wl := range req.GetWavelengthNm() {
		th, ok := xray.BraggAngleDeg(wl, d, order)
		if !ok {
			es.Add(fmt.Sprintf("wavelength_nm[%d]", i), "%g nm has no reflection in order %d on d = %g nm (needs nλ < 2d)", wl, order, d)
			continue
		}
		out.Conversions = append(out.Conversions, &goniodv1.Conversion{ThetaDeg: th + req.GetThetaOffsetDeg(), WavelengthNm: wl, EnergyKev: xray.EnergyKeV(wl)})
	}
	if err := es.Err(); err != nil {
		return nil, toStatus(err)
	}
	return out, nil
}
