package scan

import (
	"fmt"
	"math"
	"sort"
	"time"

	"goniod/daemon/instrument"
	"goniod/daemon/validate"
)

// Target is one axis's requested read-back angle at one point.
type Target struct {
	Axis string
	Deg  float64
}

// Plan is the exact list of positions of a scan. Positions are computed, never accumulated:
// point i of a stepped scan is at start + i·step.
type Plan struct {
	kind  Kind
	n     int
	axes  []instrument.Axis // axes the plan moves, in point order
	ratio []float64         // stepped scans: factor on the lead value per axis
	from  float64
	step  float64 // signed
	fixed [][]Target
}

// Len is the number of points.
func (p *Plan) Len() int { return p.n }

// Axes are the names of the axes the plan moves.
func (p *Plan) Axes() []string {
	out := make([]string, len(p.axes))
	for i, a := range p.axes {
		out[i] = a.Name
	}
	return out
}

// Targets returns the positions of point i.
func (p *Plan) Targets(i int) []Target {
	switch p.kind {
	case Coupled, AxisOnly:
		lead := p.from + float64(i)*p.step
		out := make([]Target, len(p.axes))
		for k, a := range p.axes {
			out[k] = Target{Axis: a.Name, Deg: tidy(lead * p.ratio[k])}
		}
		return out
	case Timed:
		return p.fixed[0]
	default:
		return p.fixed[i]
	}
}

// tidy rounds an angle to 1e-9° so that decimal steps give the decimal angles a user expects (10 + 102·0.1
// is 20.2, not 20.200000000000003); 1e-9° is far below any goniometer's resolution.
func tidy(deg float64) float64 { return math.Round(deg*1e9) / 1e9 }

// MinSlice is the shortest counting gate of one slice when counting to precision: shorter gates would spend
// more time in the exchange with the instrument than in counting.
const MinSlice = 10 * time.Millisecond

// NewPlan validates a request against the instrument configuration and returns its plan. Every error names the
// request field and the allowed range.
func NewPlan(r Request, cfg *instrument.Config) (*Plan, error) {
	var es validate.Errors
	checkCounting(&es, r, cfg)
	if r.Source != nil {
		cfg.CheckSource(&es, "source", r.Source.KV, r.Source.MA)
	}
	if r.Settle < 0 || r.Settle > time.Hour {
		es.Add("settle", "%v is outside the allowed range [0s, 1h]", r.Settle)
	}
	var p *Plan
	switch r.Kind {
	case Coupled:
		p = planCoupled(&es, r, cfg)
	case AxisOnly:
		p = planAxis(&es, r, cfg)
	case Timed:
		p = planTimed(&es, r, cfg)
	case List:
		p = planList(&es, r, cfg)
	default:
		es.Add("kind", "%q is not a scan kind; use coupled, axis, timed or list", r.Kind)
	}
	if err := es.Err(); err != nil {
		return nil, err
	}
	return p, nil
}

func checkCounting(es *validate.Errors, r Request, cfg *instrument.Config) {
	if r.Dwell <= 0 || r.Dwell > cfg.MaxDwell {
		es.Add("counting.dwell", "%v is outside the allowed range (0s, %v]", r.Dwell, cfg.MaxDwell)
	}
	if r.RelativeError == 0 {
		if r.MinDwell != 0 {
			es.Add("counting.min_dwell", "%v is set without counting.relative_error; it is the slice of counting to precision", r.MinDwell)
		}
		return
	}
	if !es.Range("counting.relative_error", r.RelativeError, 1e-4, 0.5, "") {
		return
	}
	if r.MinDwell != 0 && (r.MinDwell < MinSlice || r.MinDwell > r.Dwell) {
		es.Add("counting.min_dwell", "%v is outside the allowed range [%v, dwell %v] (0: dwell/100, at least %v)", r.MinDwell, MinSlice, r.Dwell, MinSlice)
	}
}

// steps returns the number of points of a stepped range: the end is included when it lies within half a step.
func steps(es *validate.Errors, field string, from, to, step float64, maxPoints int) (n int, signed float64) {
	okF := es.Finite(field+".from_deg", from)
	okT := es.Finite(field+".to_deg", to)
	okS := es.Finite(field+".step_deg", step)
	if !okF || !okT || !okS {
		return 0, 0
	}
	if step <= 0 {
		es.Add(field+".step_deg", "%g must be > 0 (the direction comes from from_deg and to_deg)", step)
		return 0, 0
	}
	span := math.Abs(to - from)
	count := math.Floor(span/step+0.5) + 1
	if count > float64(maxPoints) {
		es.Add(field+".step_deg", "%g gives %.0f points from %g° to %g°, more than the maximum of %d", step, count, from, to, maxPoints)
		return 0, 0
	}
	if to < from {
		step = -step
	}
	return int(count), step
}

func checkStepResolution(es *validate.Errors, field string, step float64, a instrument.Axis, ratio float64) {
	if math.Abs(step*ratio) < a.ResolutionDeg*(1-1e-9) {
		es.Add(field, "%g° moves axis %s by %g°, finer than its resolution of %g°", math.Abs(step), a.Name, math.Abs(step*ratio), a.ResolutionDeg)
	}
}

// checkRange checks the first and last position of an axis against its soft limits.
func checkRange(es *validate.Errors, field string, a instrument.Axis, first, last float64) {
	lo, hi := math.Min(first, last), math.Max(first, last)
	if lo < a.MinDeg || hi > a.MaxDeg {
		es.Add(field, "axis %s would go from %g° to %g°, beyond its limits [%g°, %g°]", a.Name, first, last, a.MinDeg, a.MaxDeg)
	}
}

func planCoupled(es *validate.Errors, r Request, cfg *instrument.Config) *Plan {
	coupled := cfg.Coupled()
	if len(coupled) == 0 {
		es.Add("coupled", "the instrument has no coupled axes")
		return nil
	}
	lead := coupled[0]
	if r.Axis != "" {
		a, ok := cfg.CheckAxis(es, "coupled.lead_axis", r.Axis)
		if !ok {
			return nil
		}
		if a.Coupling == 0 {
			es.Add("coupled.lead_axis", "axis %q is not coupled; coupled axes are %v", r.Axis, names(coupled))
			return nil
		}
		lead = a
	}
	n, step := steps(es, "coupled", r.FromDeg, r.ToDeg, r.StepDeg, cfg.MaxPoints)
	if n == 0 {
		return nil
	}
	p := &Plan{kind: Coupled, n: n, from: r.FromDeg, step: step}
	for _, a := range coupled {
		ratio := a.Coupling / lead.Coupling
		p.axes = append(p.axes, a)
		p.ratio = append(p.ratio, ratio)
		checkStepResolution(es, "coupled.step_deg", step, a, ratio)
		last := (r.FromDeg + float64(n-1)*step) * ratio
		field := "coupled.to_deg"
		if r.FromDeg*ratio < a.MinDeg || r.FromDeg*ratio > a.MaxDeg {
			field = "coupled.from_deg"
		}
		checkRange(es, field, a, r.FromDeg*ratio, last)
	}
	return p
}

func planAxis(es *validate.Errors, r Request, cfg *instrument.Config) *Plan {
	if r.Axis == "" {
		es.Add("axis.axis", "missing; axes are %v", cfg.AxisNames())
		return nil
	}
	a, ok := cfg.CheckAxis(es, "axis.axis", r.Axis)
	if !ok {
		return nil
	}
	n, step := steps(es, "axis", r.FromDeg, r.ToDeg, r.StepDeg, cfg.MaxPoints)
	if n == 0 {
		return nil
	}
	checkStepResolution(es, "axis.step_deg", step, a, 1)
	last := r.FromDeg + float64(n-1)*step
	field := "axis.to_deg"
	if r.FromDeg < a.MinDeg || r.FromDeg > a.MaxDeg {
		field = "axis.from_deg"
	}
	checkRange(es, field, a, r.FromDeg, last)
	return &Plan{kind: AxisOnly, n: n, from: r.FromDeg, step: step, axes: []instrument.Axis{a}, ratio: []float64{1}}
}

// position validates an axis→angle map and returns it as sorted targets.
func position(es *validate.Errors, field string, at map[string]float64, cfg *instrument.Config) ([]Target, []instrument.Axis) {
	keys := make([]string, 0, len(at))
	for k := range at {
		keys = append(keys, k)
	}
	sort.Strings(keys)
	var ts []Target
	var axes []instrument.Axis
	for _, k := range keys {
		a, ok := cfg.CheckAxis(es, field, k)
		if !ok {
			continue
		}
		if cfg.CheckAngle(es, field+"."+k, a, at[k]) {
			ts = append(ts, Target{Axis: k, Deg: at[k]})
			axes = append(axes, a)
		}
	}
	return ts, axes
}

func planTimed(es *validate.Errors, r Request, cfg *instrument.Config) *Plan {
	if r.Points < 1 || r.Points > cfg.MaxPoints {
		es.Add("timed.points", "%d is outside the allowed range [1, %d]", r.Points, cfg.MaxPoints)
	}
	ts, axes := position(es, "timed.at_deg", r.At, cfg)
	return &Plan{kind: Timed, n: r.Points, axes: axes, fixed: [][]Target{ts}}
}

func planList(es *validate.Errors, r Request, cfg *instrument.Config) *Plan {
	if len(r.Positions) < 1 || len(r.Positions) > cfg.MaxPoints {
		es.Add("list.positions", "%d positions is outside the allowed range [1, %d]", len(r.Positions), cfg.MaxPoints)
		return nil
	}
	p := &Plan{kind: List, n: len(r.Positions)}
	seen := map[string]bool{}
	for i, pos := range r.Positions {
		if len(pos) == 0 {
			es.Add(fmt.Sprintf("list.positions[%d]", i), "empty position")
		}
		ts, axes := position(es, fmt.Sprintf("list.positions[%d]", i), pos, cfg)
		p.fixed = append(p.fixed, ts)
		for _, a := range axes {
			if !seen[a.Name] {
				seen[a.Name] = true
				p.axes = append(p.axes, a)
			}
		}
	}
	return p
}

func names(as []instrument.Axis) []string {
	out := make([]string, len(as))
	for i, a := range as {
		out[i] = a.Name
	}
	return out
}
