package api

import (
	"context"
	"fmt"

	"google.golang.org/grpc"

	"goniod/daemon/engine"
	"goniod/daemon/scan"
	"goniod/daemon/validate"
	goniodv1 "goniod/proto/goniod/v1"
)

// ScanService implements goniod.v1.Scans on the engine.
type ScanService struct {
	goniodv1.UnimplementedScansServer
	Engine *engine.Engine
}

var _ goniodv1.ScansServer = (*ScanService)(nil)

// Paging limits of ListScans.
const (
	defaultPageSize = 50
	maxPageSize     = 1000
)

func (s *ScanService) SubmitScan(_ context.Context, req *goniodv1.SubmitScanRequest) (*goniodv1.Scan, error) {
	r, err := requestFromProto(req.GetScan())
	if err != nil {
		return nil, toStatus(err)
	}
	rec, err := s.Engine.Submit(r)
	if err != nil {
		return nil, toStatus(err)
	}
	return recordToProto(rec), nil
}

func (s *ScanService) SubmitSeries(_ context.Context, req *goniodv1.SubmitSeriesRequest) (*goniodv1.Series, error) {
	sr := req.GetSeries()
	r, err := requestFromProto(sr.GetScan())
	if err != nil {
		return nil, toStatus(err)
	}
	var es validate.Errors
	dom := scan.SeriesRequest{Scan: r, KeepHighVoltage: sr.GetKeepHighVoltage(), Settle: duration(&es, "series.settle", sr.GetSettle())}
	if err := es.Err(); err != nil {
		return nil, toStatus(err)
	}
	for _, src := range sr.GetSources() {
		dom.Sources = append(dom.Sources, scan.Source{KV: src.GetKv(), MA: src.GetMa()})
	}
	out, err := s.Engine.SubmitSeries(dom)
	if err != nil {
		return nil, toStatus(err)
	}
	return seriesToProto(out), nil
}

func (s *ScanService) GetScan(_ context.Context, req *goniodv1.GetScanRequest) (*goniodv1.Scan, error) {
	rec, err := s.Engine.Get(req.GetId())
	if err != nil {
		return nil, toStatus(err)
	}
	return recordToProto(rec), nil
}

func (s *ScanService) GetSeries(_ context.Context, req *goniodv1.GetSeriesRequest) (*goniodv1.Series, error) {
	out, err := s.Engine.GetSeries(req.GetId())
	if err != nil {
		return nil, toStatus(err)
	}
	return seriesToProto(out), nil
}

func (s *ScanService) ListScans(_ context.Context, req *goniodv1.ListScansRequest) (*goniodv1.ListScansResponse, error) {
	size := int(req.GetPageSize())
	if size == 0 {
		size = defaultPageSize
	}
	if size > maxPageSize {
		return nil, toStatus(&validate.FieldError{Field: "page_size", Reason: fmt.Sprintf("%d is more than the maximum of %d", size, maxPageSize)})
	}
	var states []scan.State
	for _, st := range req.GetStates() {
		d, err := stateFromProto(st)
		if err != nil {
			return nil, toStatus(&validate.FieldError{Field: "states", Reason: err.Error()})
		}
		states = append(states, d)
	}
	recs, next, err := s.Engine.List(req.GetPageToken(), size, states)
	if err != nil {
		return nil, toStatus(err)
	}
	out := &goniodv1.ListScansResponse{NextPageToken: next}
	for _, r := range recs {
		out.Scans = append(out.Scans, recordToProto(r))
	}
	return out, nil
}

func (s *ScanService) WatchScan(req *goniodv1.WatchScanRequest, stream grpc.ServerStreamingServer[goniodv1.ScanEvent]) error {
	err := s.Engine.Watch(stream.Context(), req.GetId(), int(req.GetFromIndex()), func(ev engine.Event) error {
		out := &goniodv1.ScanEvent{End: ev.End}
		if ev.Point != nil {
			out.Event = &goniodv1.ScanEvent_Point{Point: ev.Point}
		} else {
			out.Event = &goniodv1.ScanEvent_State{State: recordToProto(*ev.Record)}
		}
		return stream.Send(out)
	})
	return toStatus(err)
}

func (s *ScanService) ReadPoints(req *goniodv1.ReadPointsRequest, stream grpc.ServerStreamingServer[goniodv1.Point]) error {
	err := s.Engine.ReadPoints(stream.Context(), req.GetId(), int(req.GetFromIndex()), int(req.GetLimit()), stream.Send)
	return toStatus(err)
}

func (s *ScanService) PauseScan(_ context.Context, req *goniodv1.ScanRef) (*goniodv1.Scan, error) {
	return s.op(s.Engine.Pause, req)
}

func (s *ScanService) ResumeScan(_ context.Context, req *goniodv1.ScanRef) (*goniodv1.Scan, error) {
	return s.op(s.Engine.Resume, req)
}

func (s *ScanService) CancelScan(_ context.Context, req *goniodv1.ScanRef) (*goniodv1.Scan, error) {
	return s.op(s.Engine.Cancel, req)
}

func (s *ScanService) ReleaseScan(_ context.Context, req *goniodv1.ScanRef) (*goniodv1.Scan, error) {
	return s.op(s.Engine.Release, req)
}

func (s *ScanService) op(fn func(string) (scan.Record, error), req *goniodv1.ScanRef) (*goniodv1.Scan, error) {
	rec, err := fn(req.GetId())
	if err != nil {
		return nil, toStatus(err)
	}
	return recordToProto(rec), nil
}
