package api

import (
	"context"
	"time"

	"google.golang.org/grpc"
	"google.golang.org/protobuf/types/known/timestamppb"

	"goniod/daemon/engine"
	"goniod/daemon/instrument"
	"goniod/daemon/scan"
	"goniod/daemon/validate"
	"goniod/driver"
	goniodv1 "goniod/proto/goniod/v1"
)

// InstrumentService implements goniod.v1.Instrument.
type InstrumentService struct {
	goniodv1.UnimplementedInstrumentServer
	Engine     *engine.Engine
	Controller *instrument.Controller
	Version    string
}

var _ goniodv1.InstrumentServer = (*InstrumentService)(nil)

// Bounds of WatchState's interval.
const (
	minStateInterval     = 50 * time.Millisecond
	defaultStateInterval = time.Second
)

func (s *InstrumentService) state() *goniodv1.InstrumentState {
	cfg := s.Controller.Config()
	st := s.Controller.State()
	out := &goniodv1.InstrumentState{
		Instrument: cfg.Name, Driver: cfg.Driver,
		Source:          &goniodv1.SourceState{Kv: st.Source.KV, Ma: st.Source.MA, HighVoltage: st.Source.HighVoltage},
		InterlockClosed: st.InterlockClosed,
		Link:            linkToProto(st.Link.State), LinkReason: st.Link.Reason,
		CountRateCps: st.RateCPS, CorrectedRateCps: st.CorrectedRateCPS,
		QueueLength: uint32(s.Engine.QueueLength()), Time: timestamppb.Now(), DaemonVersion: s.Version,
	}
	for _, a := range cfg.Axes {
		out.Axes = append(out.Axes, &goniodv1.AxisState{Name: a.Name, PositionDeg: st.Positions[a.Name], MinDeg: a.MinDeg, MaxDeg: a.MaxDeg})
	}
	if rec, ok := s.Engine.Running(); ok {
		out.ScanId, out.ScanState = rec.ID, stateToProto[rec.State]
	}
	return out
}

func linkToProto(l driver.Link) goniodv1.LinkState {
	switch l {
	case driver.LinkUp:
		return goniodv1.LinkState_LINK_STATE_UP
	case driver.LinkDown:
		return goniodv1.LinkState_LINK_STATE_DOWN
	case driver.LinkConnecting:
		return goniodv1.LinkState_LINK_STATE_CONNECTING
	}
	return goniodv1.LinkState_LINK_STATE_UNSPECIFIED
}

func (s *InstrumentService) GetState(context.Context, *goniodv1.GetStateRequest) (*goniodv1.InstrumentState, error) {
	return s.state(), nil
}

func (s *InstrumentService) WatchState(req *goniodv1.WatchStateRequest, stream grpc.ServerStreamingServer[goniodv1.InstrumentState]) error {
	var es validate.Errors
	every := duration(&es, "interval", req.GetInterval())
	if err := es.Err(); err != nil {
		return toStatus(err)
	}
	if every == 0 {
		every = defaultStateInterval
	}
	if every < minStateInterval {
		return toStatus(&validate.FieldError{Field: "interval", Reason: every.String() + " is shorter than the minimum of " + minStateInterval.String()})
	}
	t := time.NewTicker(every)
	defer t.Stop()
	for {
		if err := stream.Send(s.state()); err != nil {
			return err
		}
		select {
		case <-stream.Context().Done():
			return nil
		case <-t.C:
		}
	}
}

func (s *InstrumentService) GetConfig(context.Context, *goniodv1.GetConfigRequest) (*goniodv1.InstrumentConfig, error) {
	return configToProto(s.Controller.Config()), nil
}

func (s *InstrumentService) Move(ctx context.Context, req *goniodv1.MoveRequest) (*goniodv1.InstrumentState, error) {
	if err := s.Engine.Move(ctx, req.GetAxis(), req.GetAngleDeg()); err != nil {
		return nil, toStatus(err)
	}
	return s.state(), nil
}

func (s *InstrumentService) SetSource(ctx context.Context, req *goniodv1.SetSourceRequest) (*goniodv1.InstrumentState, error) {
	ch := engine.SourceChange{KV: req.Kv, MA: req.Ma}
	switch req.GetHighVoltage() {
	case goniodv1.HighVoltage_HIGH_VOLTAGE_ON:
		on := true
		ch.HighVoltage = &on
	case goniodv1.HighVoltage_HIGH_VOLTAGE_OFF:
		off := false
		ch.HighVoltage = &off
	}
	if err := s.Engine.SetSource(ctx, ch); err != nil {
		return nil, toStatus(err)
	}
	return s.state(), nil
}

// Align runs the alignment routine. It can take minutes on a real instrument: the caller's deadline should
// allow for it; a caller that goes away stops it (high voltage off).
func (s *InstrumentService) Align(ctx context.Context, req *goniodv1.AlignRequest) (*goniodv1.AlignResult, error) {
	var es validate.Errors
	r := engine.AlignRequest{Dwell: duration(&es, "dwell", req.GetDwell()), Store: req.GetStore(),
		SearchDeg: req.GetSearchDeg(), Order: int(req.GetOrder())}
	if err := es.Err(); err != nil {
		return nil, toStatus(err)
	}
	if req.Source != nil {
		r.Source = &scan.Source{KV: req.Source.GetKv(), MA: req.Source.GetMa()}
	}
	a, err := s.Engine.Align(ctx, r)
	if err != nil {
		return nil, toStatus(err)
	}
	return alignmentToProto(a), nil
}

func (s *InstrumentService) Count(ctx context.Context, req *goniodv1.CountRequest) (*goniodv1.CountResult, error) {
	var es validate.Errors
	d := duration(&es, "dwell", req.GetDwell())
	if err := es.Err(); err != nil {
		return nil, toStatus(err)
	}
	p, err := s.Engine.CountOnce(ctx, d)
	if err != nil {
		return nil, toStatus(err)
	}
	return &goniodv1.CountResult{Point: p}, nil
}
