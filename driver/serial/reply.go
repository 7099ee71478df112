package serial

import (
	"fmt"
	"math"
	"regexp"
	"slices"
	"strconv"
	"strings"
)

// pattern is a reply pattern: a regular expression whose named groups carry the values.
type pattern struct {
	re     *regexp.Regexp
	groups []group
	// split, when set, makes the reply a list: it is cut at split and each item matched on its own.
	split string
	// required groups must match something; an optional number left empty is simply absent.
	required map[string]bool
}

type group struct {
	name  string
	index int
	kind  kind
	unit  unit
}

// compileReply compiles a reply pattern; every named group must be one the operation knows, and the
// required ones must be there.
func compileReply(expr string, allowed map[string]kind, required []string, units map[string]unit, split string) (*pattern, error) {
	re, err := regexp.Compile(expr)
	if err != nil {
		return nil, fmt.Errorf("bad pattern: %v", err)
	}
	p := &pattern{re: re, split: split, required: map[string]bool{}}
	for i, name := range re.SubexpNames() {
		if name == "" {
			continue
		}
		k, ok := allowed[name]
		if !ok {
			return nil, fmt.Errorf("unknown group (?P<%s>) (this operation has %s)", name, names(allowed))
		}
		g := group{name: name, index: i, kind: k, unit: one}
		if u, ok := units[name]; ok {
			g.unit = u
		}
		p.groups = append(p.groups, g)
	}
	for _, r := range required {
		if !slices.ContainsFunc(p.groups, func(g group) bool { return g.name == r }) {
			return nil, fmt.Errorf("the pattern needs a group (?P<%s>...)", r)
		}
		p.required[r] = true
	}
	return p, nil
}

// parse matches a reply and returns its values, one set per item of a list reply.
func (p *pattern) parse(reply string, b booleans) ([]values, error) {
	items := []string{reply}
	if p.split != "" {
		items = strings.Split(reply, p.split)
	}
	out := make([]values, 0, len(items))
	for _, item := range items {
		m := p.re.FindStringSubmatch(item)
		if m == nil {
			return nil, fmt.Errorf("reply %q does not match %q", clip(reply), p.re)
		}
		vals := values{}
		for _, g := range p.groups {
			if strings.TrimSpace(m[g.index]) == "" && g.kind != kindText {
				if p.required[g.name] {
					return nil, fmt.Errorf("reply %q: no %s", clip(reply), g.name)
				}
				continue
			}
			v, err := g.value(m[g.index], b)
			if err != nil {
				return nil, fmt.Errorf("reply %q: %s: %v", clip(reply), g.name, err)
			}
			vals[g.name] = v
		}
		out = append(out, vals)
	}
	return out, nil
}

// value converts a group's text to goniod's unit.
func (g group) value(s string, b booleans) (any, error) {
	s = strings.TrimSpace(s)
	switch g.kind {
	case kindText:
		return s, nil
	case kindBool:
		return b.parse(s)
	case kindCount:
		n, err := strconv.ParseUint(s, 10, 64)
		if err != nil {
			return nil, fmt.Errorf("%q is not a count", s)
		}
		return n, nil
	case kindInt:
		n, err := strconv.ParseInt(s, 10, 64)
		if err != nil {
			return nil, fmt.Errorf("%q is not an integer", s)
		}
		return n, nil
	}
	v, err := strconv.ParseFloat(s, 64)
	if err != nil || math.IsInf(v, 0) || math.IsNaN(v) {
		return nil, fmt.Errorf("%q is not a number", s)
	}
	return g.unit.fromInstrument(v), nil
}

// booleans are the words an instrument uses for true and false, compared case-insensitively.
type booleans struct {
	True  []string `yaml:"true"`
	False []string `yaml:"false"`
}

var defaultBooleans = booleans{True: []string{"1", "ON", "TRUE"}, False: []string{"0", "OFF", "FALSE"}}

func (b booleans) parse(s string) (bool, error) {
	for _, w := range b.True {
		if strings.EqualFold(s, w) {
			return true, nil
		}
	}
	for _, w := range b.False {
		if strings.EqualFold(s, w) {
			return false, nil
		}
	}
	return false, fmt.Errorf("%q is neither true (%s) nor false (%s)", s, strings.Join(b.True, ", "), strings.Join(b.False, ", "))
}

// clip shortens a reply for an error message.
func clip(s string) string {
	if len(s) > 80 {
		return s[:77] + "..."
	}
	return s
}

// names lists a variable set's names, sorted, for error messages.
func names(m map[string]kind) string {
	if len(m) == 0 {
		return "none"
	}
	out := make([]string, 0, len(m))
	for n := range m {
		out = append(out, n)
	}
	slices.Sort(out)
	return strings.Join(out, ", ")
}
