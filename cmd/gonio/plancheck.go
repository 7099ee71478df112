package main

import (
	"fmt"
	"math"

	"goniod/client"
)

// preflight checks a plan's entries against the instrument's configuration (tube rating, axis limits, scan
// limits) before anything is submitted, so that a plan with a mistake in its last scan does not start its first.
// The daemon's own check stays the final word; this one catches the common mistakes early.
func preflight(p *plan, cfg client.InstrumentConfig) (planEntry, []client.FieldError) {
	for _, e := range p.entries {
		if fields := preflightEntry(e, cfg); len(fields) > 0 {
			return e, fields
		}
	}
	return planEntry{}, nil
}

func preflightEntry(e planEntry, cfg client.InstrumentConfig) []client.FieldError {
	var out []client.FieldError
	add := func(field, format string, args ...any) {
		out = append(out, client.FieldError{Field: field, Reason: fmt.Sprintf(format, args...)})
	}
	sources := e.series
	if e.scan.Source != nil {
		sources = []client.Source{*e.scan.Source}
	}
	for _, s := range sources {
		switch {
		case cfg.MaxKV > 0 && s.KV > cfg.MaxKV:
			add("source.kv", "%g kV is above the tube's rating of %g kV", s.KV, cfg.MaxKV)
		case cfg.MaxMA > 0 && s.MA > cfg.MaxMA:
			add("source.ma", "%g mA is above the tube's rating of %g mA", s.MA, cfg.MaxMA)
		case cfg.MaxPowerW > 0 && s.KV*s.MA > cfg.MaxPowerW:
			add("source.kv", "%g kV × %g mA = %g W is above the tube's rating of %g W", s.KV, s.MA, s.KV*s.MA, cfg.MaxPowerW)
		}
	}
	if cfg.MaxDwell > 0 && e.scan.Dwell > cfg.MaxDwell {
		add("counting.dwell", "%v is above the instrument's maximum of %v", e.scan.Dwell, cfg.MaxDwell)
	}
	r := e.scan
	switch r.Kind {
	case client.Coupled, client.Axis:
		field := string(r.Kind)
		if n := math.Floor(math.Abs(r.To-r.From)/r.Step+0.5) + 1; cfg.MaxPoints > 0 && n > float64(cfg.MaxPoints) {
			add(field+".step_deg", "%g gives %.0f points, more than the maximum of %d", r.Step, n, cfg.MaxPoints)
		}
		for _, ax := range movingAxes(r, cfg) {
			lo, hi := math.Min(r.From, r.To)*ax.ratio, math.Max(r.From, r.To)*ax.ratio
			if lo > hi {
				lo, hi = hi, lo
			}
			if lo < ax.MinDeg || hi > ax.MaxDeg {
				add(field+".to_deg", "axis %s would go from %g° to %g°, beyond its limits [%g°, %g°]", ax.Name, lo, hi, ax.MinDeg, ax.MaxDeg)
			}
		}
	case client.Timed:
		checkPosition(cfg, "timed.at_deg", r.At, add)
	case client.List:
		for i, pos := range r.Positions {
			checkPosition(cfg, fmt.Sprintf("list.positions[%d]", i), pos, add)
		}
	}
	return out
}

type movingAxis struct {
	client.AxisConfig
	ratio float64
}

// movingAxes are the axes a stepped scan moves, with their ratio to the scan's range.
func movingAxes(r client.ScanRequest, cfg client.InstrumentConfig) []movingAxis {
	if r.Kind == client.Axis {
		for _, ax := range cfg.Axes {
			if ax.Name == r.Axis {
				return []movingAxis{{ax, 1}}
			}
		}
		return nil
	}
	var lead *client.AxisConfig
	for i, ax := range cfg.Axes {
		if ax.Coupling != 0 && (lead == nil && r.Axis == "" || ax.Name == r.Axis) {
			lead = &cfg.Axes[i]
		}
	}
	if lead == nil {
		return nil
	}
	var out []movingAxis
	for _, ax := range cfg.Axes {
		if ax.Coupling != 0 {
			out = append(out, movingAxis{ax, ax.Coupling / lead.Coupling})
		}
	}
	return out
}

func checkPosition(cfg client.InstrumentConfig, field string, at map[string]float64, add func(string, string, ...any)) {
	for _, ax := range cfg.Axes {
		if v, ok := at[ax.Name]; ok && (v < ax.MinDeg || v > ax.MaxDeg) {
			add(field+"."+ax.Name, "%g° is beyond the limits of axis %s [%g°, %g°]", v, ax.Name, ax.MinDeg, ax.MaxDeg)
		}
	}
}
