package scan

import (
	"errors"
	"fmt"
	"time"
)

// State is a scan's place in its life cycle.
type State string

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

// Terminal reports whether a scan in this state will never run again.
func (s State) Terminal() bool { return s == Done || s == Failed || s == Cancelled }

// Info says where and how a scan was taken.
type Info struct {
	Instrument string `json:"instrument"`
	// Identity is the instrument's own identification line (maker, model, serial, firmware).
	Identity      string        `json:"identity,omitempty"`
	Driver        string        `json:"driver"`
	ConfigHash    string        `json:"config_hash"`
	DaemonVersion string        `json:"daemon_version"`
	Axes          []string      `json:"axes"`
	Channels      []string      `json:"channels"`
	Crystal       string        `json:"crystal,omitempty"`
	CrystalDNM    float64       `json:"crystal_d_nm,omitempty"`
	Anode         string        `json:"anode,omitempty"`
	DeadTime      time.Duration `json:"dead_time"`
	Paralyzable   bool          `json:"dead_time_paralyzable,omitempty"`
}

// Record is the stored metadata of one scan.
type Record struct {
	ID       string  `json:"id"`
	SeriesID string  `json:"series_id,omitempty"`
	Request  Request `json:"request"`
	State    State   `json:"state"`
	Reason   string  `json:"reason,omitempty"`
	// PointsDone is informational; the points file is the truth.
	PointsDone  int       `json:"points_done"`
	PointsTotal int       `json:"points_total"`
	Created     time.Time `json:"created"`
	Started     time.Time `json:"started,omitzero"`
	Ended       time.Time `json:"ended,omitzero"`
	Info        Info      `json:"info"`
	// Source is the tube setting the scan runs with: the requested one, or the one that was on when it first
	// started. A resume switches it on again.
	Source *Source `json:"source,omitempty"`
}

// Errors of the scan life cycle; the API maps them to gRPC codes.
var (
	ErrNotFound = errors.New("not found")
	// ErrState: the operation does not apply to a scan in its present state.
	ErrState = errors.New("not allowed in this state")
	// ErrBusy: manual control while a scan runs.
	ErrBusy = errors.New("instrument busy")
	// ErrQueueFull: a submission would take the scans waiting to run beyond the configured limit.
	ErrQueueFull = errors.New("queue full")
)

// transitions lists which operation moves a scan from which states.
var transitions = map[string][]State{
	"pause":   {Running, Queued},
	"resume":  {Paused, Interrupted},
	"cancel":  {Queued, Held, Paused, Interrupted, Running},
	"release": {Held},
}

// Allow returns nil when op is allowed on a scan in state s, else an ErrState naming what would be.
func Allow(op string, s State) error {
	for _, ok := range transitions[op] {
		if s == ok {
			return nil
		}
	}
	return fmt.Errorf("%w: cannot %s a scan that is %s (allowed when %v)", ErrState, op, s, transitions[op])
}
