package client

import (
	"context"
	"time"

	"google.golang.org/protobuf/types/known/durationpb"

	goniodv1 "goniod/proto/goniod/v1"
)

// AxisState is an axis's position and limits.
type AxisState struct {
	Name                     string
	Position, MinDeg, MaxDeg float64
}

// InstrumentState is the daemon's cached view of the instrument.
type InstrumentState struct {
	Instrument, Driver           string
	Axes                         []AxisState
	KV, MA                       float64
	HighVoltage, InterlockClosed bool
	Link, LinkReason             string
	Rate, CorrectedRate          float64
	ScanID                       string
	ScanState                    State
	QueueLength                  int
	Time                         time.Time
	DaemonVersion                string
}

var linkNames = map[goniodv1.LinkState]string{
	goniodv1.LinkState_LINK_STATE_UP: "up", goniodv1.LinkState_LINK_STATE_DOWN: "down",
	goniodv1.LinkState_LINK_STATE_CONNECTING: "connecting",
}

func stateFromProto(p *goniodv1.InstrumentState) InstrumentState {
	s := InstrumentState{Instrument: p.GetInstrument(), Driver: p.GetDriver(), KV: p.GetSource().GetKv(),
		MA: p.GetSource().GetMa(), HighVoltage: p.GetSource().GetHighVoltage(), InterlockClosed: p.GetInterlockClosed(),
		Link: linkNames[p.GetLink()], LinkReason: p.GetLinkReason(), Rate: p.GetCountRateCps(),
		CorrectedRate: p.GetCorrectedRateCps(), ScanID: p.GetScanId(), ScanState: stateNames[p.GetScanState()],
		QueueLength: int(p.GetQueueLength()), DaemonVersion: p.GetDaemonVersion()}
	if s.Link == "" {
		s.Link = "unknown"
	}
	if p.Time != nil {
		s.Time = p.Time.AsTime()
	}
	for _, a := range p.GetAxes() {
		s.Axes = append(s.Axes, AxisState{Name: a.GetName(), Position: a.GetPositionDeg(), MinDeg: a.GetMinDeg(), MaxDeg: a.GetMaxDeg()})
	}
	return s
}

// State returns the instrument's cached state.
func (c *Client) State(ctx context.Context) (InstrumentState, error) {
	p, err := unary(ctx, c, true, func(ctx context.Context) (*goniodv1.InstrumentState, error) {
		return c.instrument.GetState(ctx, &goniodv1.GetStateRequest{})
	})
	if err != nil {
		return InstrumentState{}, err
	}
	return stateFromProto(p), nil
}

// WatchState streams the instrument state every interval until ctx ends.
func (c *Client) WatchState(ctx context.Context, every time.Duration) (*Stream[InstrumentState], error) {
	st, err := c.instrument.WatchState(ctx, &goniodv1.WatchStateRequest{Interval: durationpb.New(every)})
	if err != nil {
		return nil, mapError(err)
	}
	return stream(ctx, func() (InstrumentState, error) {
		p, err := st.Recv()
		if err != nil {
			return InstrumentState{}, err
		}
		return stateFromProto(p), nil
	}), nil
}

// AxisConfig is an axis's configuration.
type AxisConfig struct {
	Name                                                   string
	MinDeg, MaxDeg, ResolutionDeg, ZeroOffsetDeg, Coupling float64
}

// InstrumentConfig is the instrument as the daemon enforces it.
type InstrumentConfig struct {
	Instrument, Driver      string
	Axes                    []AxisConfig
	Anode                   string
	MaxKV, MaxMA, MaxPowerW float64
	Crystal                 string
	CrystalDNM              float64
	DeadTime                time.Duration
	Paralyzable             bool
	MaxPoints               int
	MaxDwell                time.Duration
	ConfigHash              string
}

// Config returns the instrument configuration.
func (c *Client) Config(ctx context.Context) (InstrumentConfig, error) {
	p, err := unary(ctx, c, true, func(ctx context.Context) (*goniodv1.InstrumentConfig, error) {
		return c.instrument.GetConfig(ctx, &goniodv1.GetConfigRequest{})
	})
	if err != nil {
		return InstrumentConfig{}, err
	}
	out := InstrumentConfig{Instrument: p.GetInstrument(), Driver: p.GetDriver(), Anode: p.GetTube().GetAnode(),
		MaxKV: p.GetTube().GetMaxKv(), MaxMA: p.GetTube().GetMaxMa(), MaxPowerW: p.GetTube().GetMaxPowerW(),
		Crystal: p.GetCrystal(), CrystalDNM: p.GetCrystalDNm(), DeadTime: time.Duration(p.GetDeadTimeS() * float64(time.Second)),
		Paralyzable: p.GetDeadTimeParalyzable(), MaxPoints: int(p.GetMaxPoints()), MaxDwell: p.GetMaxDwell().AsDuration(),
		ConfigHash: p.GetConfigHash()}
	for _, a := range p.GetAxes() {
		out.Axes = append(out.Axes, AxisConfig{Name: a.GetName(), MinDeg: a.GetMinDeg(), MaxDeg: a.GetMaxDeg(),
			ResolutionDeg: a.GetResolutionDeg(), ZeroOffsetDeg: a.GetZeroOffsetDeg(), Coupling: a.GetCoupling()})
	}
	return out, nil
}

// Move drives one axis to an angle (degrees).
func (c *Client) Move(ctx context.Context, axis string, deg float64) (InstrumentState, error) {
	p, err := unary(ctx, c, false, func(ctx context.Context) (*goniodv1.InstrumentState, error) {
		return c.instrument.Move(ctx, &goniodv1.MoveRequest{Axis: axis, AngleDeg: deg})
	})
	if err != nil {
		return InstrumentState{}, err
	}
	return stateFromProto(p), nil
}

// SourceChange changes the tube; nil fields keep their value.
type SourceChange struct {
	KV, MA      *float64
	HighVoltage *bool
}

// SetSource changes tube voltage, current and high voltage.
func (c *Client) SetSource(ctx context.Context, ch SourceChange) (InstrumentState, error) {
	req := &goniodv1.SetSourceRequest{Kv: ch.KV, Ma: ch.MA}
	if ch.HighVoltage != nil {
		req.HighVoltage = goniodv1.HighVoltage_HIGH_VOLTAGE_OFF
		if *ch.HighVoltage {
			req.HighVoltage = goniodv1.HighVoltage_HIGH_VOLTAGE_ON
		}
	}
	p, err := unary(ctx, c, false, func(ctx context.Context) (*goniodv1.InstrumentState, error) {
		return c.instrument.SetSource(ctx, req)
	})
	if err != nil {
		return InstrumentState{}, err
	}
	return stateFromProto(p), nil
}

// Count counts once at the present position.
func (c *Client) Count(ctx context.Context, dwell time.Duration) (Point, error) {
	p, err := unary(ctx, c, false, func(ctx context.Context) (*goniodv1.CountResult, error) {
		return c.instrument.Count(ctx, &goniodv1.CountRequest{Dwell: durationpb.New(dwell)})
	})
	if err != nil {
		return Point{}, err
	}
	return pointFromProto(p.GetPoint()), nil
}
