package main

import (
	"fmt"
	"strings"
	"time"

	"go.yaml.in/yaml/v3"

	"goniod/client"
)

// planHelp documents the plan schema (`gonio help plans`, README "Plans").
const planHelp = `A plan is a YAML file that gonio run submits: a sequence of scans, each of which may be a series (one scan
per tube setting). The scans run in the order written. Keys at the top apply to every scan unless the scan sets
its own:

  name: LiF batch 7 qualification        # shown while the plan runs
  label: LiF batch 7                      # stored with every scan (also: operator, note)
  dwell: 1s                               # counting time per point (default 1s)
  tube: {kv: 30, ma: 0.8}                 # tube setting (switches high voltage on for the scan)
  scans:
    - coupled: {from: 10, to: 55, step: 0.1}       # θ–2θ; lead: AXIS to step another axis
    - axis: {axis: theta, from: 21.5, to: 23.5, step: 0.01}
      dwell: 2s
    - coupled: {from: 4, to: 30, step: 0.1}
      series: {kv: [12, 15, 20, 25, 30], ma: 0.8}  # a tube-voltage series (or ma: [..] for a current series)
    - timed: {points: 60, at: {theta: 22.5, twotheta: 45}}
    - list: [{theta: 22.5, twotheta: 45}, {theta: 20.2, twotheta: 40.4}]

Each scan has exactly one of coupled, axis, timed or list, and may set dwell, precision (count each point to this
relative Poisson error, at most dwell), tube or series, settle (wait after setting the tube), keep_hv (leave high
voltage on afterwards), label, operator and note. Angles are in degrees, durations like 1s, 500ms, 2m.

Mistakes are reported with their line and key, all at once, before anything is submitted. When the daemon
refuses a scan, the scans of the plan already queued are cancelled, so a plan runs whole or not at all.`

// plan is a parsed plan file.
type plan struct {
	name    string
	entries []planEntry
}

// planEntry is one scan (or series) of a plan, with where it was written.
type planEntry struct {
	line   int
	node   *yaml.Node
	scan   client.ScanRequest
	series []client.Source // set: run scan once per setting
}

// planSettings are the keys a plan's top level and its scans share.
type planSettings struct {
	dwell, settle         time.Duration
	precision             float64
	tube                  *client.Source
	keepHV                bool
	label, operator, note string
	series                []client.Source
	tubeNode              *yaml.Node
}

func (s *planSettings) fields(r *yamlReader) map[string]func(*yaml.Node, string) {
	return map[string]func(*yaml.Node, string){
		"dwell":  func(v *yaml.Node, p string) { s.dwell = r.duration(v, p) },
		"settle": func(v *yaml.Node, p string) { s.settle = r.duration(v, p) },
		"precision": func(v *yaml.Node, p string) {
			if x, ok := r.float(v, p); ok {
				if x <= 0 || x >= 1 {
					r.errorf(v, p, "%g must be between 0 and 1 (e.g. 0.01 for 1 %%)", x)
				}
				s.precision = x
			}
		},
		"tube": func(v *yaml.Node, p string) {
			t := &client.Source{}
			r.mapping(v, p, map[string]func(*yaml.Node, string){
				"kv": func(v *yaml.Node, p string) { t.KV = r.positive(v, p, "kV") },
				"ma": func(v *yaml.Node, p string) { t.MA = r.positive(v, p, "mA") },
			})
			if t.KV == 0 || t.MA == 0 {
				r.errorf(v, p, "needs both kv and ma")
			}
			s.tube, s.tubeNode = t, v
		},
		"keep_hv":  func(v *yaml.Node, p string) { s.keepHV = r.boolean(v, p) },
		"label":    func(v *yaml.Node, p string) { s.label = r.str(v, p) },
		"operator": func(v *yaml.Node, p string) { s.operator = r.str(v, p) },
		"note":     func(v *yaml.Node, p string) { s.note = r.str(v, p) },
	}
}

// parsePlan reads and checks a plan; every problem is reported with its line.
func parsePlan(file string, data []byte) (*plan, error) {
	r := &yamlReader{file: file}
	root := r.parse(data)
	if root == nil {
		return nil, r.err()
	}
	p := &plan{}
	defaults := planSettings{dwell: time.Second}
	var scans *yaml.Node
	fields := defaults.fields(r)
	fields["name"] = func(v *yaml.Node, path string) { p.name = r.str(v, path) }
	fields["scans"] = func(v *yaml.Node, _ string) { scans = deref(v) }
	if !r.mapping(root, "", fields) {
		return nil, r.err()
	}
	switch {
	case scans == nil:
		r.errorf(root, "scans", "missing: list the scans to run")
	case scans.Kind != yaml.SequenceNode || len(scans.Content) == 0:
		r.errorf(scans, "scans", "want a list of scans")
	default:
		for i, n := range scans.Content {
			if e, ok := parseEntry(r, n, fmt.Sprintf("scans[%d]", i), defaults); ok {
				p.entries = append(p.entries, e)
			}
		}
	}
	if err := r.err(); err != nil {
		return nil, err
	}
	return p, nil
}

func parseEntry(r *yamlReader, n *yaml.Node, path string, defaults planSettings) (planEntry, bool) {
	n = deref(n)
	e := planEntry{line: n.Line, node: n}
	s := defaults
	s.tube, s.series = nil, nil
	kinds := 0
	fields := s.fields(r)
	kind := func(k client.Kind, read func(v *yaml.Node, p string)) func(*yaml.Node, string) {
		return func(v *yaml.Node, p string) {
			kinds++
			e.scan.Kind = k
			read(v, p)
		}
	}
	fields["coupled"] = kind(client.Coupled, func(v *yaml.Node, p string) { rangeFields(r, v, p, &e.scan, "lead") })
	fields["axis"] = kind(client.Axis, func(v *yaml.Node, p string) {
		rangeFields(r, v, p, &e.scan, "axis")
		if e.scan.Axis == "" {
			r.errorf(v, p, "needs axis: the axis that moves, e.g. theta")
		}
	})
	fields["timed"] = kind(client.Timed, func(v *yaml.Node, p string) {
		r.mapping(v, p, map[string]func(*yaml.Node, string){
			"points": func(v *yaml.Node, p string) { e.scan.Points = r.count(v, p) },
			"at":     func(v *yaml.Node, p string) { e.scan.At = r.position(v, p) },
		})
		if e.scan.Points == 0 {
			r.errorf(v, p, "needs points: how many counts to take")
		}
	})
	fields["list"] = kind(client.List, func(v *yaml.Node, p string) {
		v = deref(v)
		if v == nil || v.Kind != yaml.SequenceNode || len(v.Content) == 0 {
			r.errorf(v, p, "want a list of positions, e.g. [{theta: 22.5, twotheta: 45}]")
			return
		}
		for i, pos := range v.Content {
			e.scan.Positions = append(e.scan.Positions, r.position(pos, fmt.Sprintf("%s[%d]", p, i)))
		}
	})
	fields["series"] = func(v *yaml.Node, p string) { s.series = parseSeries(r, v, p) }
	if !r.mapping(n, path, fields) {
		return e, false
	}
	switch {
	case kinds == 0:
		r.errorf(n, path, "needs one of coupled, axis, timed or list")
	case kinds > 1:
		r.errorf(n, path, "has %d scan kinds: give exactly one of coupled, axis, timed or list", kinds)
	}
	if s.series != nil && s.tube != nil {
		r.errorf(s.tubeNode, join(path, "tube"), "a scan with a series takes its tube settings from the series")
	}
	if s.series == nil && s.tube == nil {
		s.tube = defaults.tube
	}
	e.series = s.series
	q := &e.scan
	q.Dwell, q.Settle, q.RelativeError, q.Source, q.KeepHighVoltage = s.dwell, s.settle, s.precision, s.tube, s.keepHV
	q.Label, q.Operator, q.Note = s.label, s.operator, s.note
	return e, true
}

// rangeFields reads {from, to, step} and the axis key (lead for coupled, axis for axis scans).
func rangeFields(r *yamlReader, v *yaml.Node, p string, q *client.ScanRequest, axisKey string) {
	var have [3]bool
	r.mapping(v, p, map[string]func(*yaml.Node, string){
		"from": func(v *yaml.Node, p string) { q.From, have[0] = r.float(v, p) },
		"to":   func(v *yaml.Node, p string) { q.To, have[1] = r.float(v, p) },
		"step": func(v *yaml.Node, p string) {
			q.Step, have[2] = r.positive(v, p, "degrees (the direction comes from from and to)"), true
		},
		axisKey: func(v *yaml.Node, p string) { q.Axis = r.str(v, p) },
	})
	for i, k := range []string{"from", "to", "step"} {
		if !have[i] {
			r.errorf(v, join(p, k), "missing (degrees)")
		}
	}
}

// parseSeries reads {kv: …, ma: …} where one (or both, of equal length) is a list.
func parseSeries(r *yamlReader, v *yaml.Node, p string) []client.Source {
	var kv, ma []float64
	r.mapping(v, p, map[string]func(*yaml.Node, string){
		"kv": func(v *yaml.Node, p string) { kv = r.numbers(v, p, "kV") },
		"ma": func(v *yaml.Node, p string) { ma = r.numbers(v, p, "mA") },
	})
	switch {
	case len(kv) == 0 || len(ma) == 0:
		r.errorf(v, p, "needs kv and ma, one of them a list, e.g. {kv: [12, 15, 20], ma: 0.8}")
		return nil
	case len(kv) > 1 && len(ma) > 1 && len(kv) != len(ma):
		r.errorf(v, p, "kv has %d values and ma %d: give one value for either, or lists of the same length", len(kv), len(ma))
		return nil
	}
	n := max(len(kv), len(ma))
	out := make([]client.Source, n)
	for i := range out {
		out[i] = client.Source{KV: kv[min(i, len(kv)-1)], MA: ma[min(i, len(ma)-1)]}
	}
	return out
}

// fieldAliases map the daemon's field names to plan keys where they differ beyond a unit suffix.
var fieldAliases = map[string]string{"source": "tube", "lead_axis": "lead", "relative_error": "precision",
	"keep_high_voltage": "keep_hv"}

// fieldLine finds the line of a daemon field name (e.g. "coupled.step_deg", "counting.dwell") in a plan
// entry, falling back to the entry's own line.
func (e planEntry) fieldLine(field string) int {
	line, n := e.line, e.node
	for _, seg := range strings.Split(field, ".") {
		if i := strings.IndexByte(seg, '['); i >= 0 {
			seg = seg[:i]
		}
		key := strings.TrimSuffix(strings.TrimSuffix(seg, "_deg"), "_s")
		if alias, ok := fieldAliases[seg]; ok {
			key = alias
		}
		if n == nil || n.Kind != yaml.MappingNode {
			break
		}
		for i := 0; i+1 < len(n.Content); i += 2 {
			if n.Content[i].Value == key {
				line, n = n.Content[i].Line, deref(n.Content[i+1])
				break
			}
		}
	}
	return line
}
