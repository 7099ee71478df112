package serial

import (
	"errors"
	"fmt"
	"math"
	"strings"
	"time"

	"go.yaml.in/yaml/v3"

	"goniod/driver"
)

// opSpec is an operation the driver knows: what its command may use, what its reply may and must carry.
type opSpec struct {
	name     string
	required bool
	send     map[string]kind // template fields
	each     map[string]kind // fields of one item (move_all)
	reply    map[string]kind // reply groups
	needs    []string        // reply groups that must be there
	count    bool            // not idempotent by default: counting again takes time and gives other counts
	list     bool            // the reply may be a list (split)
	travel   bool            // the reply waits for motion (per_degree)
}

var opSpecs = []opSpec{
	{name: "identify", required: true, reply: map[string]kind{"text": kindText}, needs: []string{"text"}},
	{name: "describe", reply: map[string]kind{"model": kindText, "anode": kindText, "crystal": kindText,
		"d_nm": kindLength, "max_kv": kindVoltage, "max_ma": kindCurrent, "max_power_w": kindPower,
		"dead_time": kindTime, "paralyzable": kindBool}},
	{name: "move", required: true, send: map[string]kind{"axis": kindText, "deg": kindAngle},
		reply: map[string]kind{"deg": kindAngle}, needs: []string{"deg"}, travel: true},
	{name: "move_all", send: map[string]kind{"targets": kindText}, each: map[string]kind{"axis": kindText, "deg": kindAngle},
		reply: map[string]kind{"deg": kindAngle}, needs: []string{"deg"}, list: true, travel: true},
	{name: "position", required: true, send: map[string]kind{"axis": kindText},
		reply: map[string]kind{"deg": kindAngle}, needs: []string{"deg"}},
	{name: "count", required: true, send: map[string]kind{"gate": kindTime},
		reply: map[string]kind{"counts": kindCount}, needs: []string{"counts"}, count: true, list: true},
	{name: "set_source", required: true, send: map[string]kind{"kv": kindVoltage, "ma": kindCurrent}},
	{name: "read_source", required: true, reply: map[string]kind{"kv": kindVoltage, "ma": kindCurrent, "high_voltage": kindBool},
		needs: []string{"kv", "ma", "high_voltage"}},
	{name: "high_voltage_on", required: true},
	{name: "high_voltage_off", required: true},
	{name: "read_interlock", required: true, reply: map[string]kind{"closed": kindBool}, needs: []string{"closed"}},
	{name: "read_status", reply: map[string]kind{"high_voltage": kindBool, "interlock": kindBool},
		needs: []string{"high_voltage", "interlock"}},
	{name: "keepalive"},
	{name: "sync", send: map[string]kind{"token": kindText}, reply: map[string]kind{"token": kindText}, needs: []string{"token"}},
	{name: "clear"},
	{name: "read_error", reply: map[string]kind{"code": kindInt, "message": kindText}, needs: []string{"code"}},
	{name: "reset"},
	{name: "halt"},
	{name: "abort"},
}

type opFile struct {
	Send       string            `yaml:"send"`
	Each       string            `yaml:"each"`
	Join       string            `yaml:"join"`
	Reply      string            `yaml:"reply"`
	Split      string            `yaml:"split"`
	Units      map[string]string `yaml:"units"`
	Timeout    time.Duration     `yaml:"timeout"`
	PerDegree  time.Duration     `yaml:"per_degree"`
	Idempotent *bool             `yaml:"idempotent"`
}

type perrFunc func(line int, field string, err error) error

func (p *Profile) parseOperations(keyLine int, n *yaml.Node, perr perrFunc) error {
	if n.Kind != yaml.MappingNode {
		return perr(n.Line, "operations", fmt.Errorf("want a mapping of operation names, got %s", kindOf(n)))
	}
	for i := 0; i+1 < len(n.Content); i += 2 {
		key, val := n.Content[i], n.Content[i+1]
		var spec *opSpec
		for j := range opSpecs {
			if opSpecs[j].name == key.Value {
				spec = &opSpecs[j]
			}
		}
		if spec == nil {
			return perr(key.Line, "operations."+key.Value, fmt.Errorf("unknown operation (have %s)", specNames(false)))
		}
		if _, dup := p.ops[spec.name]; dup {
			return perr(key.Line, "operations."+key.Value, errors.New("defined twice"))
		}
		op, err := p.compileOperation(spec, key.Line, val, perr)
		if err != nil {
			return err
		}
		p.ops[spec.name] = op
	}
	for _, s := range opSpecs {
		if s.required && p.ops[s.name] == nil {
			return perr(keyLine, "operations", fmt.Errorf("missing operation %q (required: %s)", s.name, specNames(true)))
		}
	}
	return nil
}

func specNames(required bool) string {
	var out []string
	for _, s := range opSpecs {
		if s.required || !required {
			out = append(out, s.name)
		}
	}
	return strings.Join(out, ", ")
}

func (p *Profile) compileOperation(spec *opSpec, keyLine int, n *yaml.Node, perr perrFunc) (*Operation, error) {
	field := "operations." + spec.name
	var f opFile
	lines, err := decodeStrict(n, &f, field, perr)
	if err != nil {
		return nil, err
	}
	at := func(key string) int {
		if l, ok := lines[key]; ok {
			return l
		}
		return keyLine
	}
	units := map[string]unit{}
	for name, u := range f.Units {
		k, ok := spec.send[name]
		if !ok {
			k, ok = spec.each[name]
		}
		if !ok {
			k, ok = spec.reply[name]
		}
		if !ok {
			return nil, perr(at("units"), field+".units."+name, fmt.Errorf("%s has no field or group %q", spec.name, name))
		}
		if units[name], err = parseUnit(u, k); err != nil {
			return nil, perr(at("units"), field+".units."+name, err)
		}
	}
	op := &Operation{Name: spec.name, join: f.Join, timeout: f.Timeout, perDegree: f.PerDegree, idempotent: !spec.count}
	if f.Idempotent != nil {
		op.idempotent = *f.Idempotent
	}
	if f.Send == "" {
		return nil, perr(keyLine, field+".send", errors.New("required: the command to send"))
	}
	if op.send, err = compileTemplate(f.Send, spec.send, units); err != nil {
		return nil, perr(at("send"), field+".send", err)
	}
	switch {
	case spec.each != nil && f.Each == "":
		return nil, perr(keyLine, field+".each", errors.New("required: the template of one target, e.g. \"{axis},{deg}\""))
	case spec.each == nil && (f.Each != "" || f.Join != ""):
		return nil, perr(at("each"), field+".each", fmt.Errorf("only move_all has each and join"))
	case spec.each != nil:
		if op.each, err = compileTemplate(f.Each, spec.each, units); err != nil {
			return nil, perr(at("each"), field+".each", err)
		}
	}
	if f.Split != "" && !spec.list {
		return nil, perr(at("split"), field+".split", errors.New("only move_all and count replies can be lists"))
	}
	if f.PerDegree != 0 && !spec.travel {
		return nil, perr(at("per_degree"), field+".per_degree", errors.New("only move and move_all wait for motion"))
	}
	if f.Reply == "" {
		return nil, perr(keyLine, field+".reply", errors.New("required: a pattern for the reply (every command is answered)"))
	}
	if op.reply, err = compileReply(f.Reply, spec.reply, spec.needs, units, f.Split); err != nil {
		return nil, perr(at("reply"), field+".reply", err)
	}
	if op.timeout != 0 && (op.timeout < time.Millisecond || op.timeout > time.Hour) {
		return nil, perr(at("timeout"), field+".timeout", fmt.Errorf("%v: must be within [1ms, 1h] (write units: 500ms, 2s)", op.timeout))
	}
	if op.perDegree < 0 || op.perDegree > time.Minute {
		return nil, perr(at("per_degree"), field+".per_degree", fmt.Errorf("%v: must be within [0, 1m]", op.perDegree))
	}
	return op, nil
}

type instrumentFile struct {
	Model       string        `yaml:"model"`
	Axes        []yaml.Node   `yaml:"axes"`
	Channels    []string      `yaml:"channels"`
	Anode       string        `yaml:"anode"`
	MaxKV       float64       `yaml:"max_kv"`
	MaxMA       float64       `yaml:"max_ma"`
	MaxPowerW   float64       `yaml:"max_power_w"`
	Crystal     string        `yaml:"crystal"`
	CrystalDNM  float64       `yaml:"crystal_d_nm"`
	DeadTime    time.Duration `yaml:"dead_time"`
	Paralyzable bool          `yaml:"dead_time_paralyzable"`
}

type axisFile struct {
	Name          string  `yaml:"name"`
	Code          string  `yaml:"code"`
	MinDeg        float64 `yaml:"min_deg"`
	MaxDeg        float64 `yaml:"max_deg"`
	ResolutionDeg float64 `yaml:"resolution_deg"`
	Coupling      float64 `yaml:"coupling"`
}

func (p *Profile) parseInstrument(n *yaml.Node, perr perrFunc) error {
	var f instrumentFile
	lines, err := decodeStrict(n, &f, "instrument", perr)
	if err != nil {
		return err
	}
	p.desc = driver.Description{Model: f.Model, Channels: f.Channels, Anode: f.Anode, MaxKV: f.MaxKV, MaxMA: f.MaxMA,
		MaxPowerW: f.MaxPowerW, Crystal: f.Crystal, CrystalSpacingNM: f.CrystalDNM, DeadTime: f.DeadTime, DeadTimeParalyzable: f.Paralyzable}
	p.axisCodes = map[string]string{}
	if len(f.Axes) == 0 {
		return perr(n.Line, "instrument.axes", errors.New("required: at least one axis"))
	}
	for i := range f.Axes {
		an := &f.Axes[i]
		var a axisFile
		where := fmt.Sprintf("instrument.axes[%d]", i)
		if _, err := decodeStrict(an, &a, where, perr); err != nil {
			return err
		}
		switch {
		case a.Name == "":
			return perr(an.Line, where+".name", errors.New("required"))
		case p.axisCodes[a.Name] != "":
			return perr(an.Line, where+".name", fmt.Errorf("axis %q named twice", a.Name))
		case !(a.MinDeg < a.MaxDeg) || math.IsInf(a.MaxDeg-a.MinDeg, 0):
			return perr(an.Line, where, fmt.Errorf("min_deg %g must be below max_deg %g", a.MinDeg, a.MaxDeg))
		case !(a.ResolutionDeg > 0 && a.ResolutionDeg <= 1):
			return perr(an.Line, where+".resolution_deg", fmt.Errorf("%g: must be within (0, 1]", a.ResolutionDeg))
		}
		if a.Code == "" {
			a.Code = a.Name
		}
		p.axisCodes[a.Name] = a.Code
		p.desc.Axes = append(p.desc.Axes, driver.AxisDescription{Name: a.Name, MinDeg: a.MinDeg, MaxDeg: a.MaxDeg,
			ResolutionDeg: a.ResolutionDeg, Coupling: a.Coupling})
	}
	if len(f.Channels) == 0 {
		return perr(n.Line, "instrument.channels", errors.New("required: the counter channels, the primary detector first"))
	}
	for _, c := range []struct {
		name string
		v    float64
	}{{"max_kv", f.MaxKV}, {"max_ma", f.MaxMA}, {"max_power_w", f.MaxPowerW}, {"crystal_d_nm", f.CrystalDNM}} {
		if c.v < 0 || math.IsNaN(c.v) || math.IsInf(c.v, 0) {
			return perr(lines[c.name], "instrument."+c.name, fmt.Errorf("%g: must be zero (unknown) or positive", c.v))
		}
	}
	if f.DeadTime < 0 || f.DeadTime > 10*time.Millisecond {
		return perr(lines["dead_time"], "instrument.dead_time", fmt.Errorf("%v: must be within [0, 10ms]", f.DeadTime))
	}
	return nil
}
