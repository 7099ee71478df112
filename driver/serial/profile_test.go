package serial

import (
	"errors"
	"math"
	"os"
	"strings"
	"testing"
	"time"
)

func readFile(t testing.TB, path string) string {
	t.Helper()
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	return string(b)
}

func TestShippedProfiles(t *testing.T) {
	p := DefaultProfile()
	if len(p.ops) != len(opSpecs) {
		t.Errorf("the built-in profile has %d operations, want all %d", len(p.ops), len(opSpecs))
	}
	if p.desc.Axes[1].Name != "twotheta" || p.axisCodes["twotheta"] != "TTH" || p.desc.Axes[1].Coupling != 2 {
		t.Errorf("built-in axes %+v, codes %v", p.desc.Axes, p.axisCodes)
	}
	ex, err := LoadProfile("profiles/example-bench.yaml")
	if err != nil {
		t.Fatal(err)
	}
	if ex.CommandEnding != "\r\n" || ex.ops["move_all"] != nil || ex.ops["halt"] != nil || len(ex.desc.Channels) != 2 {
		t.Errorf("example profile: ending %q, move_all %v, halt %v, channels %v", ex.CommandEnding, ex.ops["move_all"], ex.ops["halt"], ex.desc.Channels)
	}
}

// lineOf is the 1-based line of the first line containing s.
func lineOf(t *testing.T, text, s string) int {
	t.Helper()
	for i, l := range strings.Split(text, "\n") {
		if strings.Contains(l, s) {
			return i + 1
		}
	}
	t.Fatalf("%q not in the profile", s)
	return 0
}

// TestBadProfiles: each mistake is refused with the file, the line and the field named.
func TestBadProfiles(t *testing.T) {
	base := readFile(t, "profiles/goniod.yaml")
	tests := []struct {
		name     string
		old, new string // replace old by new in the built-in profile
		at       string // the refused line contains this
		field    string
		says     string
	}{
		{"missing operation", "  count:\n    send: \"COUN? {gate}\"   # the reply waits for the gate: timeout + gate\n    reply: '^(?P<counts>\\d+)$'\n    split: \",\"\n", "",
			"operations:", "operations", `missing operation "count"`},
		{"bad pattern", `reply: '^(?P<deg>[-+0-9.eE]+)$'` + "\n  count:", `reply: '^(?P<deg>[-+0-9.eE+)$'` + "\n  count:",
			`reply: '^(?P<deg>[-+0-9.eE+)$'`, "operations.position.reply", "bad pattern"},
		{"impossible unit", "    per_degree: 150ms  #", "    units: {deg: mA}\n    per_degree: 150ms  #",
			"units: {deg: mA}", "operations.move.units.deg", `unit "mA" is not an angle unit`},
		{"unit of nothing", "    per_degree: 150ms  #", "    units: {gate: s}\n    per_degree: 150ms  #",
			"units: {gate: s}", "operations.move.units.gate", `move has no field or group "gate"`},
		{"negative factor", "    per_degree: 150ms  #", "    units: {deg: -0.01 deg}\n    per_degree: 150ms  #",
			"units: {deg: -0.01 deg}", "operations.move.units.deg", "positive number"},
		{"unknown template field", `send: "POS? {axis}"`, `send: "POS? {angle}"`,
			`send: "POS? {angle}"`, "operations.position.send", "unknown field {angle}"},
		{"bad format", `send: "MOVE {axis},{deg:.4}"`, `send: "MOVE {axis},{deg:%q}"`,
			`send: "MOVE {axis},{deg:%q}"`, "operations.move.send", `format "%q"`},
		{"text format on a number", `send: "MOVE {axis},{deg:.4}"`, `send: "MOVE {axis},{deg:%s}"`,
			`{deg:%s}`, "operations.move.send", "does not fit an angle"},
		{"unknown group", `reply: '^(?P<closed>[01])$'`, `reply: '^(?P<shut>[01])$'`,
			`(?P<shut>`, "operations.read_interlock.reply", "unknown group (?P<shut>)"},
		{"missing group", `reply: '^(?P<closed>[01])$'`, `reply: '^[01]$'`,
			`reply: '^[01]$'`, "operations.read_interlock.reply", "needs a group (?P<closed>"},
		{"split on a single reply", "    reply: '^(?P<closed>[01])$'", "    reply: '^(?P<closed>[01])$'\n    split: \";\"",
			`split: ";"`, "operations.read_interlock.split", "only move_all and count"},
		{"unknown operation", "  halt:", "  explode:\n    send: x\n    reply: x\n  halt:",
			"explode:", "operations.explode", "unknown operation"},
		{"unknown field", "timeout: 1s ", "timeout_ms: 1000\ntimeout: 1s ",
			"timeout_ms", "timeout_ms", `unknown field "timeout_ms"`},
		{"timeout without units", "timeout: 1s ", "timeout: 5 ",
			"timeout: 5", "timeout", "cannot unmarshal !!int `5` into time.Duration"},
		{"timeout too short", "timeout: 1s ", "timeout: 1us ",
			"timeout: 1us", "timeout", "must be within [1ms, 1m]"},
		{"axis limits", "min_deg: -10, max_deg: 100", "min_deg: 100, max_deg: -10",
			"min_deg: 100", "instrument.axes[0]", "must be below max_deg"},
		{"error code name", "  out_of_range: [-222]", "  too_far: [-222]",
			"error_codes:", "error_codes.too_far", "unknown"},
		{"line ending", `command_ending: "\n"`, `command_ending: ";"`,
			`command_ending: ";"`, "command_ending", `use "\n"`},
		{"newline in a command", `send: "*IDN?"`, `send: "*IDN?\nx"`,
			`send: "*IDN?\nx"`, "operations.identify.send", "must not contain CR or LF"},
		{"wrong type", "  max_kv: 35", "  max_kv: high", "max_kv: high", "instrument.max_kv", "cannot unmarshal"},
		{"unknown operation field", "    per_degree: 150ms  #", "    retry: 3\n    per_degree: 150ms  #",
			"retry: 3", "operations.move.retry", `unknown field "retry"`},
		{"no reply", "    reply: '^(?P<closed>[01])$'\n", "",
			"read_interlock:", "operations.read_interlock.reply", "required"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			if !strings.Contains(base, tc.old) {
				t.Fatalf("the built-in profile has no %q", tc.old)
			}
			text := strings.Replace(base, tc.old, tc.new, 1)
			_, err := ParseProfile("bad.yaml", []byte(text))
			var pe *ProfileError
			if !errors.As(err, &pe) {
				t.Fatalf("ParseProfile: %v; want a *ProfileError", err)
			}
			if want := lineOf(t, text, tc.at); pe.File != "bad.yaml" || pe.Line != want || pe.Field != tc.field || !strings.Contains(err.Error(), tc.says) {
				t.Errorf("error %q (line %d, field %q); want line %d, field %q, saying %q", err, pe.Line, pe.Field, want, tc.field, tc.says)
			}
		})
	}
}

func TestNotAProfile(t *testing.T) {
	for _, text := range []string{"", "- a\n- b\n", "name: [\n", "name: x\ninstrument: 3\n"} {
		var pe *ProfileError
		if _, err := ParseProfile("x.yaml", []byte(text)); !errors.As(err, &pe) {
			t.Errorf("ParseProfile(%q) = %v; want a *ProfileError", text, err)
		}
	}
}

func TestTemplates(t *testing.T) {
	steps, _ := parseUnit("0.005 deg", kindAngle)
	ms, _ := parseUnit("ms", kindTime)
	volts, _ := parseUnit("V", kindVoltage)
	vars := map[string]kind{"axis": kindText, "deg": kindAngle, "gate": kindTime, "kv": kindVoltage}
	units := map[string]unit{"gate": ms, "kv": volts}
	tests := []struct {
		tmpl string
		vals values
		want string
	}{
		{"MOVE {axis},{deg:.4}", values{"axis": "THET", "deg": 20.049999999999997}, "MOVE THET,20.05"},
		{"MOVE {axis},{deg:.4}", values{"axis": "TTH", "deg": -0.00001}, "MOVE TTH,0"},
		{"COUN? {gate}", values{"gate": 0.25}, "COUN? 250"},
		{"T {kv:%d}", values{"kv": 29.9996}, "T 30000"},
		{"{deg:%.3f} {deg:%e} {deg}", values{"deg": 1.5}, "1.500 1.500000e+00 1.5"},
		{"{{literal}} {axis:%s}", values{"axis": "a"}, "{literal} a"},
	}
	for _, tc := range tests {
		tp, err := compileTemplate(tc.tmpl, vars, units)
		if err != nil {
			t.Fatalf("compileTemplate(%q): %v", tc.tmpl, err)
		}
		if got := tp.render(tc.vals); got != tc.want {
			t.Errorf("%q with %v = %q, want %q", tc.tmpl, tc.vals, got, tc.want)
		}
	}
	tp, _ := compileTemplate("goto {deg:%d}", vars, map[string]unit{"deg": steps})
	if got := tp.render(values{"deg": 22.5}); got != "goto 4500" {
		t.Errorf("22.5° in steps of 0.005° = %q, want goto 4500", got)
	}
	for _, bad := range []string{"{", "}", "{deg", "{nope}", "{deg:.13}", "{axis:.2}", "{deg:%v}", "{deg:x}"} {
		if _, err := compileTemplate(bad, vars, nil); err == nil {
			t.Errorf("compileTemplate(%q) accepted", bad)
		}
	}
}

func TestReplies(t *testing.T) {
	ex, err := LoadProfile("profiles/example-bench.yaml")
	if err != nil {
		t.Fatal(err)
	}
	got, err := ex.ops["position"].reply.parse("at 4500", ex.bools)
	if err != nil || got[0]["deg"].(float64) != 22.5 {
		t.Errorf("at 4500 in steps of 0.005° = %v, %v; want 22.5°", got, err)
	}
	got, err = ex.ops["read_source"].reply.parse("tube 25000 400 beam yes", ex.bools)
	if err != nil || math.Abs(got[0]["kv"].(float64)-25) > 1e-12 || math.Abs(got[0]["ma"].(float64)-0.4) > 1e-12 || got[0]["high_voltage"] != true {
		t.Errorf("tube 25000 400 beam yes = %v, %v; want 25 kV, 0.4 mA, on", got, err)
	}
	got, err = ex.ops["count"].reply.parse("n=1234 n=56", ex.bools)
	if err != nil || len(got) != 2 || got[0]["counts"] != uint64(1234) || got[1]["counts"] != uint64(56) {
		t.Errorf("n=1234 n=56 = %v, %v; want two channels", got, err)
	}
	if got, err := ex.errorReply.parse("fail 12", ex.bools); err != nil || got[0]["code"] != int64(12) {
		t.Errorf("error reply without a message = %v, %v", got, err)
	}
	if got, err := ex.ops["read_error"].reply.parse("12 ", ex.bools); err != nil || got[0]["message"] != "" {
		t.Errorf("read_error with an empty message = %v, %v", got, err)
	}
	opt, err := compileReply(`^(?P<code>\d*)(?P<message>.*)$`, map[string]kind{"code": kindInt, "message": kindText}, nil, nil, "")
	if err != nil {
		t.Fatal(err)
	}
	if got, err := opt.parse("no code", ex.bools); err != nil || got[0]["code"] != nil {
		t.Errorf("an empty optional code = %v, %v; want it absent", got, err)
	}
	req, _ := compileReply(`^at (?P<deg>-?\d*)$`, map[string]kind{"deg": kindAngle}, []string{"deg"}, nil, "")
	if got, err := req.parse("at ", ex.bools); err == nil {
		t.Errorf("an empty required angle accepted as %v", got)
	}
	def := DefaultProfile()
	for _, bad := range []string{"", "1,1,1", "2,1", "1;1", " 1,1"} {
		if got, err := def.ops["read_status"].reply.parse(bad, def.bools); err == nil {
			t.Errorf("read_status reply %q accepted as %v", bad, got)
		}
	}
	if got, err := def.ops["describe"].reply.parse("Mo,Si(111),0.3135601,50,1,50,0.00012,1", def.bools); err != nil {
		t.Error(err)
	} else if d := described(def.desc, got[0]); d.Anode != "Mo" || d.Crystal != "Si(111)" || d.MaxKV != 50 || d.DeadTime != 120*time.Microsecond || !d.DeadTimeParalyzable {
		t.Errorf("described = %+v", d)
	}
}

func TestUnits(t *testing.T) {
	tests := []struct {
		s    string
		k    kind
		size float64
	}{{"deg", kindAngle, 1}, {"mdeg", kindAngle, 1e-3}, {"0.01 deg", kindAngle, 0.01}, {"rad", kindAngle, 180 / math.Pi},
		{"ms", kindTime, 1e-3}, {"V", kindVoltage, 1e-3}, {"uA", kindCurrent, 1e-3}, {"A", kindLength, 0.1}}
	for _, tc := range tests {
		u, err := parseUnit(tc.s, tc.k)
		if err != nil || math.Abs(u.size-tc.size) > 1e-15 {
			t.Errorf("parseUnit(%q) = %v, %v; want size %g", tc.s, u, err, tc.size)
		}
	}
	for _, bad := range []struct {
		s string
		k kind
	}{{"kV", kindAngle}, {"0 deg", kindAngle}, {"inf deg", kindAngle}, {"1 2 deg", kindAngle}, {"s", kindCount}, {"furlong", kindLength}} {
		if _, err := parseUnit(bad.s, bad.k); err == nil {
			t.Errorf("parseUnit(%q, %s) accepted", bad.s, kindNames[bad.k])
		}
	}
}

func TestSettings(t *testing.T) {
	s := Settings{Device: "/dev/ttyUSB0"}
	if err := s.check(); err != nil || s.Baud != 115200 || s.DataBits != 8 || s.StopBits != 1 || *s.Retries != 2 {
		t.Fatalf("defaults: %+v, %v", s, err)
	}
	for _, bad := range []Settings{{}, {Device: "x", Baud: 10}, {Device: "x", DataBits: 9}, {Device: "x", Parity: "sometimes"},
		{Device: "x", StopBits: 3}, {Device: "x", LineEnding: ";"}, {Device: "x", ReadTimeout: time.Nanosecond},
		{Device: "x", Failures: -1}, {Device: "x", ReconnectMax: time.Hour}} {
		if err := bad.check(); err == nil || !strings.Contains(err.Error(), "drivers.serial.") {
			t.Errorf("settings %+v: %v; want an error naming the field", bad, err)
		}
	}
}

// FuzzProfile: the profile loader never panics, refuses with a *ProfileError, and what it accepts has every
// required operation and a usable axis.
func FuzzProfile(f *testing.F) {
	f.Add([]byte(readFile(f, "profiles/goniod.yaml")))
	f.Add([]byte(readFile(f, "profiles/example-bench.yaml")))
	f.Fuzz(func(t *testing.T, b []byte) {
		p, err := ParseProfile("fuzz.yaml", b)
		if err != nil {
			var pe *ProfileError
			if !errors.As(err, &pe) {
				t.Fatalf("error %v is not a *ProfileError", err)
			}
			return
		}
		for _, s := range opSpecs {
			if s.required && p.ops[s.name] == nil {
				t.Fatalf("accepted without %s", s.name)
			}
		}
		for _, a := range p.desc.Axes {
			if p.axisCodes[a.Name] == "" || !(a.MinDeg < a.MaxDeg) {
				t.Fatalf("accepted axis %+v", a)
			}
		}
	})
}

// FuzzReply: the reply parser never panics, and what it accepts holds every required group, as finite numbers
// of the right types.
func FuzzReply(f *testing.F) {
	for _, s := range []string{"1,1", "22.5", "1578", "30,0.8,1", `ERR -222,"Data out of range"`, "Cu,LiF(200),0.201315,35,1,35,0.0001,0", "1e308,1e309", "\xff"} {
		f.Add(s)
	}
	p := DefaultProfile()
	pats := []*pattern{p.errorReply}
	for _, s := range opSpecs {
		pats = append(pats, p.ops[s.name].reply)
	}
	f.Fuzz(func(t *testing.T, reply string) {
		for _, pat := range pats {
			got, err := pat.parse(reply, p.bools)
			if err != nil {
				continue
			}
			for _, vals := range got {
				for name := range pat.required {
					if _, ok := vals[name]; !ok {
						t.Fatalf("%q accepted without the required %s", reply, name)
					}
				}
				for name, v := range vals {
					switch v := v.(type) {
					case float64:
						if math.IsNaN(v) || math.IsInf(v, 0) {
							t.Fatalf("%q: %s = %v", reply, name, v)
						}
					case string, bool, uint64, int64:
					default:
						t.Fatalf("%q: %s has type %T", reply, name, v)
					}
				}
			}
		}
	})
}
