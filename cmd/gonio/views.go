package main

import (
	"fmt"
	"maps"
	"slices"
	"strings"
	"time"

	"goniod/client"
)

// scanView is a scan's JSON form in gonio's output.
type scanView struct {
	ID          string         `json:"id"`
	SeriesID    string         `json:"series_id,omitempty"`
	State       client.State   `json:"state"`
	Reason      string         `json:"reason,omitempty"`
	PointsDone  int            `json:"points_done"`
	PointsTotal int            `json:"points_total"`
	Kind        client.Kind    `json:"kind"`
	Axis        string         `json:"axis,omitempty"`
	FromDeg     *float64       `json:"from_deg,omitempty"`
	ToDeg       *float64       `json:"to_deg,omitempty"`
	StepDeg     *float64       `json:"step_deg,omitempty"`
	DwellS      float64        `json:"dwell_s"`
	Precision   float64        `json:"relative_error,omitempty"`
	Source      *client.Source `json:"source,omitempty"`
	Label       string         `json:"label,omitempty"`
	Operator    string         `json:"operator,omitempty"`
	Note        string         `json:"note,omitempty"`
	Created     *time.Time     `json:"created,omitempty"`
	Started     *time.Time     `json:"started,omitempty"`
	Ended       *time.Time     `json:"ended,omitempty"`
	Instrument  string         `json:"instrument,omitempty"`
	Identity    string         `json:"identity,omitempty"`
	Driver      string         `json:"driver,omitempty"`
	ConfigHash  string         `json:"config_hash,omitempty"`
	Version     string         `json:"daemon_version,omitempty"`
	Anode       string         `json:"anode,omitempty"`
	Crystal     string         `json:"crystal,omitempty"`
}

func optTime(t time.Time) *time.Time {
	if t.IsZero() {
		return nil
	}
	return &t
}

func viewOf(s client.Scan) scanView {
	r := s.Request
	v := scanView{ID: s.ID, SeriesID: s.SeriesID, State: s.State, Reason: s.Reason, PointsDone: s.PointsDone,
		PointsTotal: s.PointsTotal, Kind: r.Kind, Axis: r.Axis, DwellS: r.Dwell.Seconds(), Precision: r.RelativeError,
		Source: r.Source, Label: r.Label, Operator: r.Operator, Note: r.Note, Created: optTime(s.Created),
		Started: optTime(s.Started), Ended: optTime(s.Ended), Instrument: s.Info.Instrument, Identity: s.Info.Identity, Driver: s.Info.Driver,
		ConfigHash: s.Info.ConfigHash, Version: s.Info.DaemonVersion, Anode: s.Info.Anode, Crystal: s.Info.Crystal}
	if r.Kind == client.Coupled || r.Kind == client.Axis {
		v.FromDeg, v.ToDeg, v.StepDeg = &r.From, &r.To, &r.Step
	}
	return v
}

// describeRange is a short human description of what a scan moves.
func describeRange(r client.ScanRequest) string {
	switch r.Kind {
	case client.Coupled:
		lead := r.Axis
		if lead == "" {
			lead = "theta"
		}
		return fmt.Sprintf("%s %g→%g° step %g°", lead, r.From, r.To, r.Step)
	case client.Axis:
		return fmt.Sprintf("%s %g→%g° step %g°", r.Axis, r.From, r.To, r.Step)
	case client.Timed:
		return fmt.Sprintf("%d counts%s", r.Points, positionText(r.At))
	case client.List:
		return fmt.Sprintf("%d positions", len(r.Positions))
	}
	return ""
}

func positionText(at map[string]float64) string {
	if len(at) == 0 {
		return ""
	}
	parts := make([]string, 0, len(at))
	for _, k := range slices.Sorted(maps.Keys(at)) {
		parts = append(parts, fmt.Sprintf("%s=%g", k, at[k]))
	}
	return " at " + strings.Join(parts, ",")
}
