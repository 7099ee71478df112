// Package scan holds the daemon's scan domain: requests and their validation, the planner that turns a request
// into exact positions, and the scan record with its life cycle. It is pure: no I/O, no clock, no goroutines.
package scan

import (
	"time"
)

// Kind is what a scan moves.
type Kind string

const (
	// Coupled steps the lead axis and moves the coupled axes at their ratios (θ–2θ).
	Coupled Kind = "coupled"
	// AxisOnly moves one named axis; the others stay (rocking curve, detector scan).
	AxisOnly Kind = "axis"
	// Timed counts repeatedly at one position.
	Timed Kind = "timed"
	// List visits explicit positions.
	List Kind = "list"
)

// Source is a tube setting.
type Source struct {
	KV float64 `json:"kv"`
	MA float64 `json:"ma"`
}

// Request is a validated-on-submit description of one scan. Its JSON form is stored in the scan's metadata.
type Request struct {
	Kind Kind `json:"kind"`
	// Coupled: the lead axis (empty: the instrument's first coupled axis). AxisOnly: the axis that moves.
	Axis    string  `json:"axis,omitempty"`
	FromDeg float64 `json:"from_deg,omitempty"`
	ToDeg   float64 `json:"to_deg,omitempty"`
	StepDeg float64 `json:"step_deg,omitempty"`
	// Timed: number of points and optional position.
	Points int                `json:"points,omitempty"`
	At     map[string]float64 `json:"at_deg,omitempty"`
	// List: explicit positions.
	Positions []map[string]float64 `json:"positions,omitempty"`

	// Counting: fixed Dwell, or count to RelativeError with Dwell as the longest and MinDwell as the slice.
	Dwell         time.Duration `json:"dwell"`
	RelativeError float64       `json:"relative_error,omitempty"`
	MinDwell      time.Duration `json:"min_dwell,omitempty"`

	// Source to set (and switch on) before the first point; nil keeps the source as it is.
	Source          *Source       `json:"source,omitempty"`
	KeepHighVoltage bool          `json:"keep_high_voltage,omitempty"`
	Settle          time.Duration `json:"settle,omitempty"`

	Label    string `json:"label,omitempty"`
	Operator string `json:"operator,omitempty"`
	Note     string `json:"note,omitempty"`
}

// SeriesRequest is one scan per source setting.
type SeriesRequest struct {
	Scan            Request       `json:"scan"`
	Sources         []Source      `json:"sources"`
	Settle          time.Duration `json:"settle,omitempty"`
	KeepHighVoltage bool          `json:"keep_high_voltage,omitempty"`
}

// Expand turns a series into its scans: each with its source and settle time; high voltage stays on between
// them and goes off after the last unless the series says otherwise.
func (s SeriesRequest) Expand() []Request {
	out := make([]Request, len(s.Sources))
	for i, src := range s.Sources {
		r := s.Scan
		src := src
		r.Source = &src
		if s.Settle > 0 {
			r.Settle = s.Settle
		}
		r.KeepHighVoltage = i < len(s.Sources)-1 || s.KeepHighVoltage
		out[i] = r
	}
	return out
}
