package main

import (
	"errors"
	"fmt"
	"math"
	"slices"
	"sort"
	"strconv"
	"strings"
	"time"

	"go.yaml.in/yaml/v3"
)

// yamlReader walks YAML nodes (which carry line numbers) and collects every problem with its file, line and
// key path, so that a plan or a configuration file is refused with all its mistakes at once.
type yamlReader struct {
	file string
	errs []lineError
}

// lineError is one problem at one line of a YAML file.
type lineError struct {
	line int
	msg  string
}

// parseYAML reads a document's root node; an empty document gives an empty mapping.
func (r *yamlReader) parse(data []byte) *yaml.Node {
	var doc yaml.Node
	if err := yaml.Unmarshal(data, &doc); err != nil {
		r.errs = append(r.errs, lineError{line: yamlErrorLine(err), msg: strings.TrimPrefix(err.Error(), "yaml: ")})
		return nil
	}
	if len(doc.Content) == 0 {
		return &yaml.Node{Kind: yaml.MappingNode, Line: 1}
	}
	return doc.Content[0]
}

// yamlErrorLine digs the line number out of a syntax error ("yaml: line 7: …").
func yamlErrorLine(err error) int {
	s := err.Error()
	if _, rest, ok := strings.Cut(s, "line "); ok {
		digits := rest
		if i := strings.IndexFunc(rest, func(r rune) bool { return r < '0' || r > '9' }); i >= 0 {
			digits = rest[:i]
		}
		if n, err := strconv.Atoi(digits); err == nil {
			return n
		}
	}
	return 0
}

func (r *yamlReader) errorf(n *yaml.Node, path, format string, args ...any) {
	line := 0
	if n != nil {
		line = n.Line
	}
	msg := fmt.Sprintf(format, args...)
	if path != "" {
		msg = path + ": " + msg
	}
	r.errs = append(r.errs, lineError{line: line, msg: msg})
}

// err joins the collected problems, ordered by line ("plan.yaml:7: scans[1].coupled.step: …").
func (r *yamlReader) err() error {
	if len(r.errs) == 0 {
		return nil
	}
	sort.SliceStable(r.errs, func(i, j int) bool { return r.errs[i].line < r.errs[j].line })
	var out []error
	for _, e := range r.errs {
		if e.line > 0 {
			out = append(out, fmt.Errorf("%s:%d: %s", r.file, e.line, e.msg))
		} else {
			out = append(out, fmt.Errorf("%s: %s", r.file, e.msg))
		}
	}
	return errors.Join(out...)
}

func deref(n *yaml.Node) *yaml.Node {
	for n != nil && n.Kind == yaml.AliasNode {
		n = n.Alias
	}
	return n
}

func join(path, key string) string {
	if path == "" {
		return key
	}
	return path + "." + key
}

// mapping calls fields[key] for each key of a mapping node; unknown and repeated keys are errors that list the
// known ones. It returns false when n is not a mapping.
func (r *yamlReader) mapping(n *yaml.Node, path string, fields map[string]func(v *yaml.Node, path string)) bool {
	n = deref(n)
	if n == nil || n.Kind != yaml.MappingNode {
		r.errorf(n, path, "want a mapping of keys to values")
		return false
	}
	seen := map[string]bool{}
	for i := 0; i+1 < len(n.Content); i += 2 {
		k, v := n.Content[i], n.Content[i+1]
		f, ok := fields[k.Value]
		switch {
		case !ok:
			known := make([]string, 0, len(fields))
			for name := range fields {
				known = append(known, name)
			}
			slices.Sort(known)
			r.errorf(k, join(path, k.Value), "unknown key (known: %s)", strings.Join(known, ", "))
		case seen[k.Value]:
			r.errorf(k, join(path, k.Value), "given twice")
		default:
			seen[k.Value] = true
			f(v, join(path, k.Value))
		}
	}
	return true
}

// scalar returns a scalar node's text, or false after recording an error.
func (r *yamlReader) scalar(n *yaml.Node, path, want string) (string, bool) {
	n = deref(n)
	if n == nil || n.Kind != yaml.ScalarNode {
		r.errorf(n, path, "want %s", want)
		return "", false
	}
	return n.Value, true
}

func (r *yamlReader) str(n *yaml.Node, path string) string {
	s, _ := r.scalar(n, path, "a text")
	return s
}

func (r *yamlReader) float(n *yaml.Node, path string) (float64, bool) {
	s, ok := r.scalar(n, path, "a number")
	if !ok {
		return 0, false
	}
	v, err := strconv.ParseFloat(s, 64)
	if err != nil || math.IsNaN(v) || math.IsInf(v, 0) {
		r.errorf(n, path, "%q is not a number", s)
		return 0, false
	}
	return v, true
}

// positive reads a number that must be > 0.
func (r *yamlReader) positive(n *yaml.Node, path, unit string) float64 {
	v, ok := r.float(n, path)
	if ok && v <= 0 {
		r.errorf(n, path, "%g must be > 0 %s", v, unit)
	}
	return v
}

func (r *yamlReader) count(n *yaml.Node, path string) int {
	s, ok := r.scalar(n, path, "a whole number")
	if !ok {
		return 0
	}
	v, err := strconv.Atoi(s)
	if err != nil || v < 1 {
		r.errorf(n, path, "%q must be a whole number ≥ 1", s)
		return 0
	}
	return v
}

func (r *yamlReader) duration(n *yaml.Node, path string) time.Duration {
	s, ok := r.scalar(n, path, "a duration such as 1s, 500ms or 2m")
	if !ok {
		return 0
	}
	d, err := time.ParseDuration(s)
	if err != nil || d <= 0 {
		r.errorf(n, path, "%q must be a positive duration such as 1s, 500ms or 2m", s)
		return 0
	}
	return d
}

func (r *yamlReader) boolean(n *yaml.Node, path string) bool {
	s, ok := r.scalar(n, path, "true or false")
	if !ok {
		return false
	}
	v, err := strconv.ParseBool(s)
	if err != nil {
		r.errorf(n, path, "%q: want true or false", s)
	}
	return v
}

// numbers reads one number or a sequence of them; each must be > 0.
func (r *yamlReader) numbers(n *yaml.Node, path, unit string) []float64 {
	n = deref(n)
	if n != nil && n.Kind == yaml.SequenceNode {
		if len(n.Content) == 0 {
			r.errorf(n, path, "empty list")
		}
		out := make([]float64, 0, len(n.Content))
		for i, c := range n.Content {
			out = append(out, r.positive(c, fmt.Sprintf("%s[%d]", path, i), unit))
		}
		return out
	}
	return []float64{r.positive(n, path, unit)}
}

// position reads {axis: degrees, …}.
func (r *yamlReader) position(n *yaml.Node, path string) map[string]float64 {
	n = deref(n)
	if n == nil || n.Kind != yaml.MappingNode || len(n.Content) == 0 {
		r.errorf(n, path, "want axis angles in degrees, e.g. {theta: 22.5, twotheta: 45}")
		return nil
	}
	out := map[string]float64{}
	for i := 0; i+1 < len(n.Content); i += 2 {
		k := n.Content[i]
		if _, dup := out[k.Value]; dup {
			r.errorf(k, join(path, k.Value), "given twice")
		}
		if v, ok := r.float(n.Content[i+1], join(path, k.Value)); ok {
			out[k.Value] = v
		}
	}
	return out
}
