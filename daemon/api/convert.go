package api

import (
	"fmt"
	"time"

	"google.golang.org/protobuf/types/known/durationpb"
	"google.golang.org/protobuf/types/known/timestamppb"

	"goniod/daemon/engine"
	"goniod/daemon/instrument"
	"goniod/daemon/scan"
	"goniod/daemon/validate"
	goniodv1 "goniod/proto/goniod/v1"
)

// duration converts an optional proto duration, naming the field when it is malformed.
func duration(es *validate.Errors, field string, d *durationpb.Duration) time.Duration {
	if d == nil {
		return 0
	}
	if err := d.CheckValid(); err != nil {
		es.Add(field, "%v", err)
		return 0
	}
	return d.AsDuration()
}

func durationProto(d time.Duration) *durationpb.Duration {
	if d == 0 {
		return nil
	}
	return durationpb.New(d)
}

func timeProto(t time.Time) *timestamppb.Timestamp {
	if t.IsZero() {
		return nil
	}
	return timestamppb.New(t)
}

// Limits on free-text metadata, so a request cannot make the daemon store unbounded text.
const maxTextLen = 4096

// requestFromProto converts a scan request; structural problems (no kind, malformed durations, oversized
// text) are field errors. Range checks are the planner's.
func requestFromProto(p *goniodv1.ScanRequest) (scan.Request, error) {
	var es validate.Errors
	var r scan.Request
	if p == nil {
		es.Add("scan", "missing")
		return r, es.Err()
	}
	switch k := p.Kind.(type) {
	case *goniodv1.ScanRequest_Coupled:
		r.Kind, r.Axis, r.FromDeg, r.ToDeg, r.StepDeg = scan.Coupled, k.Coupled.GetLeadAxis(), k.Coupled.GetFromDeg(), k.Coupled.GetToDeg(), k.Coupled.GetStepDeg()
	case *goniodv1.ScanRequest_Axis:
		r.Kind, r.Axis, r.FromDeg, r.ToDeg, r.StepDeg = scan.AxisOnly, k.Axis.GetAxis(), k.Axis.GetFromDeg(), k.Axis.GetToDeg(), k.Axis.GetStepDeg()
	case *goniodv1.ScanRequest_Timed:
		r.Kind, r.Points, r.At = scan.Timed, int(k.Timed.GetPoints()), k.Timed.GetAtDeg()
	case *goniodv1.ScanRequest_List:
		r.Kind = scan.List
		for _, pos := range k.List.GetPositions() {
			r.Positions = append(r.Positions, pos.GetAtDeg())
		}
	default:
		es.Add("kind", "missing: set one of coupled, axis, timed, list")
	}
	c := p.GetCounting()
	r.Dwell = duration(&es, "counting.dwell", c.GetDwell())
	r.RelativeError = c.GetRelativeError()
	r.MinDwell = duration(&es, "counting.min_dwell", c.GetMinDwell())
	if p.Source != nil {
		r.Source = &scan.Source{KV: p.Source.GetKv(), MA: p.Source.GetMa()}
	}
	r.KeepHighVoltage = p.GetKeepHighVoltage()
	r.Settle = duration(&es, "settle", p.GetSettle())
	r.Label, r.Operator, r.Note = p.GetLabel(), p.GetOperator(), p.GetNote()
	for _, t := range []struct{ field, v string }{{"label", r.Label}, {"operator", r.Operator}, {"note", r.Note}} {
		if len(t.v) > maxTextLen {
			es.Add(t.field, "%d bytes is longer than the maximum of %d", len(t.v), maxTextLen)
		}
	}
	return r, es.Err()
}

func requestToProto(r scan.Request) *goniodv1.ScanRequest {
	p := &goniodv1.ScanRequest{
		Counting:        &goniodv1.Counting{Dwell: durationProto(r.Dwell), RelativeError: r.RelativeError, MinDwell: durationProto(r.MinDwell)},
		KeepHighVoltage: r.KeepHighVoltage,
		Settle:          durationProto(r.Settle),
		Label:           r.Label, Operator: r.Operator, Note: r.Note,
	}
	if r.Source != nil {
		p.Source = &goniodv1.Source{Kv: r.Source.KV, Ma: r.Source.MA}
	}
	switch r.Kind {
	case scan.Coupled:
		p.Kind = &goniodv1.ScanRequest_Coupled{Coupled: &goniodv1.CoupledScan{FromDeg: r.FromDeg, ToDeg: r.ToDeg, StepDeg: r.StepDeg, LeadAxis: r.Axis}}
	case scan.AxisOnly:
		p.Kind = &goniodv1.ScanRequest_Axis{Axis: &goniodv1.AxisScan{Axis: r.Axis, FromDeg: r.FromDeg, ToDeg: r.ToDeg, StepDeg: r.StepDeg}}
	case scan.Timed:
		p.Kind = &goniodv1.ScanRequest_Timed{Timed: &goniodv1.TimedScan{Points: uint32(r.Points), AtDeg: r.At}}
	case scan.List:
		l := &goniodv1.ListScan{}
		for _, pos := range r.Positions {
			l.Positions = append(l.Positions, &goniodv1.Position{AtDeg: pos})
		}
		p.Kind = &goniodv1.ScanRequest_List{List: l}
	}
	return p
}

var stateToProto = map[scan.State]goniodv1.ScanState{
	scan.Queued: goniodv1.ScanState_SCAN_STATE_QUEUED, scan.Running: goniodv1.ScanState_SCAN_STATE_RUNNING,
	scan.Paused: goniodv1.ScanState_SCAN_STATE_PAUSED, scan.Interrupted: goniodv1.ScanState_SCAN_STATE_INTERRUPTED,
	scan.Held: goniodv1.ScanState_SCAN_STATE_HELD, scan.Done: goniodv1.ScanState_SCAN_STATE_DONE,
	scan.Failed: goniodv1.ScanState_SCAN_STATE_FAILED, scan.Cancelled: goniodv1.ScanState_SCAN_STATE_CANCELLED,
}

func stateFromProto(s goniodv1.ScanState) (scan.State, error) {
	for k, v := range stateToProto {
		if v == s {
			return k, nil
		}
	}
	return "", fmt.Errorf("unknown scan state %v", s)
}

func recordToProto(r scan.Record) *goniodv1.Scan {
	return &goniodv1.Scan{
		Id: r.ID, SeriesId: r.SeriesID, Request: requestToProto(r.Request), State: stateToProto[r.State],
		Reason: r.Reason, PointsDone: uint32(r.PointsDone), PointsTotal: uint32(r.PointsTotal),
		Created: timeProto(r.Created), Started: timeProto(r.Started), Ended: timeProto(r.Ended),
		Info: &goniodv1.ScanInfo{
			Instrument: r.Info.Instrument, Identity: r.Info.Identity, Driver: r.Info.Driver, ConfigHash: r.Info.ConfigHash,
			DaemonVersion: r.Info.DaemonVersion, Axes: r.Info.Axes, Crystal: r.Info.Crystal,
			CrystalDNm: r.Info.CrystalDNM, Anode: r.Info.Anode, DeadTimeS: r.Info.DeadTime.Seconds(), Channels: r.Info.Channels,
		},
	}
}

func seriesToProto(s engine.SeriesRecord) *goniodv1.Series {
	req := &goniodv1.SeriesRequest{
		Scan: requestToProto(s.Request.Scan), Settle: durationProto(s.Request.Settle), KeepHighVoltage: s.Request.KeepHighVoltage,
	}
	for _, src := range s.Request.Sources {
		req.Sources = append(req.Sources, &goniodv1.Source{Kv: src.KV, Ma: src.MA})
	}
	return &goniodv1.Series{Id: s.ID, ScanIds: s.ScanIDs, Request: req}
}

func configToProto(c instrument.Config) *goniodv1.InstrumentConfig {
	p := &goniodv1.InstrumentConfig{
		Instrument: c.Name, Driver: c.Driver, Crystal: c.Crystal, CrystalDNm: c.CrystalDNM,
		DeadTimeS: c.DeadTime.Seconds(), DeadTimeParalyzable: c.DeadTimeParalyzable,
		MaxPoints: uint32(c.MaxPoints), MaxDwell: durationProto(c.MaxDwell), ConfigHash: c.Hash(),
		Tube: &goniodv1.TubeRating{Anode: c.Tube.Anode, MaxKv: c.Tube.MaxKV, MaxMa: c.Tube.MaxMA, MaxPowerW: c.Tube.MaxPowerW},
	}
	for _, a := range c.Axes {
		p.Axes = append(p.Axes, &goniodv1.AxisConfig{Name: a.Name, MinDeg: a.MinDeg, MaxDeg: a.MaxDeg,
			ResolutionDeg: a.ResolutionDeg, ZeroOffsetDeg: a.ZeroOffsetDeg, Coupling: a.Coupling})
	}
	return p
}

func alignmentToProto(a engine.Alignment) *goniodv1.AlignResult {
	out := &goniodv1.AlignResult{Stored: a.Stored, ScanIds: a.ScanIDs, Reference: a.Reference}
	for _, o := range a.Offsets {
		out.Offsets = append(out.Offsets, &goniodv1.AxisOffset{Axis: o.Axis, OffsetDeg: o.OffsetDeg, OffsetErrDeg: o.ErrDeg, PreviousOffsetDeg: o.PreviousDeg})
	}
	return out
}
