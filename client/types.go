package client

import (
	"time"

	"google.golang.org/protobuf/types/known/durationpb"

	goniodv1 "goniod/proto/goniod/v1"
)

// Kind is what a scan moves.
type Kind string

// Scan kinds.
const (
	Coupled Kind = "coupled" // θ–2θ: the lead axis steps, coupled axes follow at their ratios
	Axis    Kind = "axis"    // one axis moves (rocking curve, detector scan)
	Timed   Kind = "timed"   // fixed position, repeated counts
	List    Kind = "list"    // explicit positions
)

// State is a scan's place in its life cycle.
type State string

// Scan states.
const (
	Queued      State = "queued"
	Running     State = "running"
	Paused      State = "paused"
	Interrupted State = "interrupted"
	Held        State = "held"
	Done        State = "done"
	Failed      State = "failed"
	Cancelled   State = "cancelled"
)

// Terminal reports whether a scan in this state will not run again.
func (s State) Terminal() bool { return s == Done || s == Failed || s == Cancelled }

// Source is a tube setting.
type Source struct {
	KV float64 `json:"kv"`
	MA float64 `json:"ma"`
}

// ScanRequest describes one scan. Angles in degrees.
type ScanRequest struct {
	Kind Kind
	// Coupled: lead axis (empty: the instrument's). Axis: the axis that moves.
	Axis            string
	From, To, Step  float64
	Points          int
	At              map[string]float64
	Positions       []map[string]float64
	Dwell           time.Duration
	RelativeError   float64
	MinDwell        time.Duration
	Source          *Source
	KeepHighVoltage bool
	Settle          time.Duration
	Label, Operator string
	Note            string
}

// ScanInfo says where and how a scan was taken.
type ScanInfo struct {
	Instrument, Driver, ConfigHash, DaemonVersion string
	// Identity is the instrument's own identification line (maker, model, serial, firmware).
	Identity   string
	Axes       []string
	Channels   []string
	Crystal    string
	CrystalDNM float64
	Anode      string
	DeadTime   time.Duration
}

// Scan is a scan's record.
type Scan struct {
	ID, SeriesID            string
	Request                 ScanRequest
	State                   State
	Reason                  string
	PointsDone, PointsTotal int
	Created, Started, Ended time.Time
	Info                    ScanInfo
}

// Series is a tube-voltage or -current series.
type Series struct {
	ID      string
	ScanIDs []string
}

// SeriesRequest runs Scan once per source setting.
type SeriesRequest struct {
	Scan            ScanRequest
	Sources         []Source
	Settle          time.Duration
	KeepHighVoltage bool
}

func dur(d time.Duration) *durationpb.Duration {
	if d == 0 {
		return nil
	}
	return durationpb.New(d)
}

func (r ScanRequest) proto() *goniodv1.ScanRequest {
	p := &goniodv1.ScanRequest{
		Counting:        &goniodv1.Counting{Dwell: dur(r.Dwell), RelativeError: r.RelativeError, MinDwell: dur(r.MinDwell)},
		KeepHighVoltage: r.KeepHighVoltage, Settle: dur(r.Settle), Label: r.Label, Operator: r.Operator, Note: r.Note,
	}
	if r.Source != nil {
		p.Source = &goniodv1.Source{Kv: r.Source.KV, Ma: r.Source.MA}
	}
	switch r.Kind {
	case Coupled:
		p.Kind = &goniodv1.ScanRequest_Coupled{Coupled: &goniodv1.CoupledScan{FromDeg: r.From, ToDeg: r.To, StepDeg: r.Step, LeadAxis: r.Axis}}
	case Axis:
		p.Kind = &goniodv1.ScanRequest_Axis{Axis: &goniodv1.AxisScan{Axis: r.Axis, FromDeg: r.From, ToDeg: r.To, StepDeg: r.Step}}
	case Timed:
		p.Kind = &goniodv1.ScanRequest_Timed{Timed: &goniodv1.TimedScan{Points: uint32(r.Points), AtDeg: r.At}}
	case List:
		l := &goniodv1.ListScan{}
		for _, pos := range r.Positions {
			l.Positions = append(l.Positions, &goniodv1.Position{AtDeg: pos})
		}
		p.Kind = &goniodv1.ScanRequest_List{List: l}
	}
	return p
}

func requestFromProto(p *goniodv1.ScanRequest) ScanRequest {
	r := ScanRequest{
		Dwell: p.GetCounting().GetDwell().AsDuration(), RelativeError: p.GetCounting().GetRelativeError(),
		MinDwell: p.GetCounting().GetMinDwell().AsDuration(), KeepHighVoltage: p.GetKeepHighVoltage(),
		Settle: p.GetSettle().AsDuration(), Label: p.GetLabel(), Operator: p.GetOperator(), Note: p.GetNote(),
	}
	if p.Source != nil {
		r.Source = &Source{KV: p.Source.GetKv(), MA: p.Source.GetMa()}
	}
	switch k := p.Kind.(type) {
	case *goniodv1.ScanRequest_Coupled:
		r.Kind, r.Axis, r.From, r.To, r.Step = Coupled, k.Coupled.GetLeadAxis(), k.Coupled.GetFromDeg(), k.Coupled.GetToDeg(), k.Coupled.GetStepDeg()
	case *goniodv1.ScanRequest_Axis:
		r.Kind, r.Axis, r.From, r.To, r.Step = Axis, k.Axis.GetAxis(), k.Axis.GetFromDeg(), k.Axis.GetToDeg(), k.Axis.GetStepDeg()
	case *goniodv1.ScanRequest_Timed:
		r.Kind, r.Points, r.At = Timed, int(k.Timed.GetPoints()), k.Timed.GetAtDeg()
	case *goniodv1.ScanRequest_List:
		r.Kind = List
		for _, pos := range k.List.GetPositions() {
			r.Positions = append(r.Positions, pos.GetAtDeg())
		}
	}
	return r
}

var stateNames = map[goniodv1.ScanState]State{
	goniodv1.ScanState_SCAN_STATE_QUEUED: Queued, goniodv1.ScanState_SCAN_STATE_RUNNING: Running,
	goniodv1.ScanState_SCAN_STATE_PAUSED: Paused, goniodv1.ScanState_SCAN_STATE_INTERRUPTED: Interrupted,
	goniodv1.ScanState_SCAN_STATE_HELD: Held, goniodv1.ScanState_SCAN_STATE_DONE: Done,
	goniodv1.ScanState_SCAN_STATE_FAILED: Failed, goniodv1.ScanState_SCAN_STATE_CANCELLED: Cancelled,
}

func stateProto(s State) goniodv1.ScanState {
	for k, v := range stateNames {
		if v == s {
			return k
		}
	}
	return goniodv1.ScanState_SCAN_STATE_UNSPECIFIED
}

func scanFromProto(p *goniodv1.Scan) Scan {
	s := Scan{
		ID: p.GetId(), SeriesID: p.GetSeriesId(), Request: requestFromProto(p.GetRequest()), State: stateNames[p.GetState()],
		Reason: p.GetReason(), PointsDone: int(p.GetPointsDone()), PointsTotal: int(p.GetPointsTotal()),
	}
	if p.Created != nil {
		s.Created = p.Created.AsTime()
	}
	if p.Started != nil {
		s.Started = p.Started.AsTime()
	}
	if p.Ended != nil {
		s.Ended = p.Ended.AsTime()
	}
	i := p.GetInfo()
	s.Info = ScanInfo{Instrument: i.GetInstrument(), Identity: i.GetIdentity(), Driver: i.GetDriver(), ConfigHash: i.GetConfigHash(),
		DaemonVersion: i.GetDaemonVersion(), Axes: i.GetAxes(), Channels: i.GetChannels(), Crystal: i.GetCrystal(), CrystalDNM: i.GetCrystalDNm(),
		Anode: i.GetAnode(), DeadTime: time.Duration(i.GetDeadTimeS() * float64(time.Second))}
	return s
}

// AxisReading is one axis at one point.
type AxisReading struct {
	Name string
	// Set is the requested angle, Actual the read-back one (degrees).
	Set, Actual float64
}

// Point is one stored measurement.
type Point struct {
	Index int
	Axes  []AxisReading
	// Dwell actually used, seconds.
	Dwell  float64
	Counts uint64
	// Raw and dead-time-corrected rates with their errors, counts per second.
	Rate, RateErr, CorrectedRate, CorrectedRateErr float64
	KV, MA                                         float64
	Time                                           time.Time
	// First-order wavelength (nm) and energy (keV); zero when the crystal is unknown.
	WavelengthNM, EnergyKeV float64
	proto                   *goniodv1.Point
}

// Angle returns the read-back angle of the named axis (NaN-free: false when absent).
func (p Point) Angle(axis string) (float64, bool) {
	for _, a := range p.Axes {
		if a.Name == axis {
			return a.Actual, true
		}
	}
	return 0, false
}

func pointFromProto(p *goniodv1.Point) Point {
	out := Point{Index: int(p.GetIndex()), Dwell: p.GetDwellS(), Counts: p.GetCounts(), Rate: p.GetRateCps(),
		RateErr: p.GetRateErrCps(), CorrectedRate: p.GetCorrectedRateCps(), CorrectedRateErr: p.GetCorrectedRateErrCps(),
		KV: p.GetTubeKv(), MA: p.GetTubeMa(), WavelengthNM: p.GetWavelengthNm(), EnergyKeV: p.GetEnergyKev(), proto: p}
	if p.Time != nil {
		out.Time = p.Time.AsTime()
	}
	for _, a := range p.GetAxes() {
		out.Axes = append(out.Axes, AxisReading{Name: a.GetName(), Set: a.GetSetDeg(), Actual: a.GetActualDeg()})
	}
	return out
}

// Event is one item of a watch: a Point, or the Scan record after a state change. End marks the last event.
type Event struct {
	Point *Point
	Scan  *Scan
	End   bool
}
