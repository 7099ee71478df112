package serial

import (
	"errors"
	"fmt"
	"math"
	"regexp"
	"strconv"
	"strings"
)

// template is a command template: literal text with {name} or {name:format} fields. A format is ".N" (at
// most N decimals, trailing zeros dropped: the fewest bytes), or a Go verb (%d, %.3f, %e, %g, %s). {{ and }}
// are literal braces.
type template struct {
	parts []part
}

type part struct {
	lit    string
	name   string // empty for literal text
	kind   kind
	unit   unit
	format string // "" (default, ".6" for numbers), ".N" or a Go verb
}

var goVerb = regexp.MustCompile(`^%[-+ 0#]?\d{0,2}(\.\d{1,2})?[dfeEgGs]$`)

// values are the variables of one command, or the groups of one reply: float64 for quantities, uint64 for
// counts, int64 for codes, bool, or string.
type values map[string]any

// compileTemplate checks a template against the variables it may use and the units of the operation.
func compileTemplate(s string, vars map[string]kind, units map[string]unit) (*template, error) {
	if strings.ContainsAny(s, "\r\n") {
		return nil, errors.New("a command must not contain CR or LF (the line ending is added)")
	}
	t := &template{}
	var lit strings.Builder
	for i := 0; i < len(s); i++ {
		c := s[i]
		switch {
		case c == '{' && i+1 < len(s) && s[i+1] == '{', c == '}' && i+1 < len(s) && s[i+1] == '}':
			lit.WriteByte(c)
			i++
		case c == '}':
			return nil, fmt.Errorf("unmatched } at column %d (write }} for a literal brace)", i+1)
		case c == '{':
			end := strings.IndexByte(s[i:], '}')
			if end < 0 {
				return nil, fmt.Errorf("unclosed { at column %d", i+1)
			}
			p, err := compileField(s[i+1:i+end], vars, units)
			if err != nil {
				return nil, err
			}
			if lit.Len() > 0 {
				t.parts = append(t.parts, part{lit: lit.String()})
				lit.Reset()
			}
			t.parts = append(t.parts, p)
			i += end
		default:
			lit.WriteByte(c)
		}
	}
	if lit.Len() > 0 {
		t.parts = append(t.parts, part{lit: lit.String()})
	}
	return t, nil
}

func compileField(f string, vars map[string]kind, units map[string]unit) (part, error) {
	name, format, _ := strings.Cut(f, ":")
	k, ok := vars[name]
	if !ok {
		return part{}, fmt.Errorf("unknown field {%s} (this operation has %s)", name, names(vars))
	}
	p := part{name: name, kind: k, unit: one, format: format}
	if u, ok := units[name]; ok {
		p.unit = u
	}
	numeric := symbols[k] != nil
	switch {
	case format == "":
	case strings.HasPrefix(format, "."):
		n, err := strconv.Atoi(format[1:])
		if err != nil || n < 0 || n > 12 || !numeric {
			return part{}, fmt.Errorf("{%s}: format %q: .N (N from 0 to 12) is for numbers", f, format)
		}
	case goVerb.MatchString(format):
		if text := format[len(format)-1] == 's'; text == numeric {
			return part{}, fmt.Errorf("{%s}: format %q does not fit %s", f, format, kindNames[k])
		}
	default:
		return part{}, fmt.Errorf("{%s}: format %q: use .N or a verb such as %%d, %%.3f, %%e, %%g, %%s", f, format)
	}
	return p, nil
}

// render fills the template with vals, converted to the instrument's units.
func (t *template) render(vals values) string {
	var b strings.Builder
	for _, p := range t.parts {
		if p.name == "" {
			b.WriteString(p.lit)
			continue
		}
		switch v := vals[p.name].(type) {
		case string:
			b.WriteString(v)
		case float64:
			b.WriteString(formatNumber(p.unit.toInstrument(v), p.format))
		}
	}
	return b.String()
}

// formatNumber writes v as the format asks; the default is at most 6 decimals.
func formatNumber(v float64, format string) string {
	switch {
	case format == "":
		return trimmed(v, 6)
	case strings.HasPrefix(format, "."):
		n, _ := strconv.Atoi(format[1:])
		return trimmed(v, n)
	case strings.HasSuffix(format, "d"):
		return fmt.Sprintf(format, int64(math.Round(v)))
	}
	return fmt.Sprintf(format, v)
}

// trimmed writes v with at most decimals digits after the point, trailing zeros (and point) dropped.
func trimmed(v float64, decimals int) string {
	s := strconv.FormatFloat(v, 'f', decimals, 64)
	if strings.Contains(s, ".") {
		s = strings.TrimRight(strings.TrimRight(s, "0"), ".")
	}
	if s == "-0" {
		return "0"
	}
	return s
}
