package serial

import (
	"embed"
	"errors"
	"fmt"
	"os"
	"reflect"
	"regexp"
	"slices"
	"strconv"
	"strings"
	"time"

	"go.yaml.in/yaml/v3"

	"goniod/driver"
)

// Profile describes an ASCII line protocol: per operation, the command template, the reply pattern, units
// and timeouts. docs/profiles.md explains how to write one.
type Profile struct {
	Name string
	// File the profile came from ("built-in" for the embedded default).
	File                       string
	CommandEnding, ReplyEnding string
	Timeout, Keepalive         time.Duration
	errorReply                 *pattern
	codes                      map[int64]error
	bools                      booleans
	desc                       driver.Description
	axisCodes                  map[string]string // goniod axis name -> the instrument's name for it
	ops                        map[string]*Operation
}

// Operation is one compiled operation of a profile.
type Operation struct {
	Name       string
	send, each *template
	join       string
	reply      *pattern
	timeout    time.Duration // 0: the reply timeout of the profile (or the settings)
	perDegree  time.Duration
	idempotent bool
}

// ProfileError names the file, line and field of a problem in a profile.
type ProfileError struct {
	File  string
	Line  int
	Field string
	Err   error
}

func (e *ProfileError) Error() string {
	return fmt.Sprintf("profile %s line %d: %s: %v", e.File, e.Line, e.Field, e.Err)
}

func (e *ProfileError) Unwrap() error { return e.Err }

//go:embed profiles/*.yaml
var builtin embed.FS

// DefaultProfile is the built-in profile: goniod's own protocol (docs/protocol.md), as goniosim speaks it.
func DefaultProfile() *Profile {
	b, err := builtin.ReadFile("profiles/goniod.yaml")
	if err != nil {
		panic(err)
	}
	p, err := ParseProfile("built-in goniod.yaml", b)
	if err != nil {
		panic(err) // the embedded profile is tested
	}
	return p
}

// LoadProfile reads a profile file.
func LoadProfile(path string) (*Profile, error) {
	b, err := os.ReadFile(path)
	if err != nil {
		return nil, fmt.Errorf("profile: %w", err)
	}
	return ParseProfile(path, b)
}

type profileFile struct {
	Name          string             `yaml:"name"`
	Description   string             `yaml:"description"`
	CommandEnding string             `yaml:"command_ending"`
	ReplyEnding   string             `yaml:"reply_ending"`
	Timeout       time.Duration      `yaml:"timeout"`
	Keepalive     time.Duration      `yaml:"keepalive"`
	ErrorReply    string             `yaml:"error_reply"`
	ErrorCodes    map[string][]int64 `yaml:"error_codes"`
	Booleans      *booleans          `yaml:"booleans"`
	Instrument    yaml.Node          `yaml:"instrument"`
	Operations    yaml.Node          `yaml:"operations"`
}

// errorSentinels are the error_codes keys: instrument codes that mean one of goniod's errors.
var errorSentinels = map[string]error{
	"out_of_range":   driver.ErrOutOfRange,
	"unknown_axis":   driver.ErrUnknownAxis,
	"interlock_open": driver.ErrInterlockOpen,
}

// ParseProfile reads a profile; name (the file) is used in errors.
func ParseProfile(name string, b []byte) (*Profile, error) {
	perr := func(line int, field string, err error) error {
		return &ProfileError{File: name, Line: line, Field: field, Err: err}
	}
	var doc yaml.Node
	if err := yaml.Unmarshal(b, &doc); err != nil {
		return nil, perr(0, "(file)", err)
	}
	if len(doc.Content) == 0 {
		return nil, perr(0, "(file)", errors.New("empty profile"))
	}
	root := doc.Content[0]
	var f profileFile
	lines, err := decodeStrict(root, &f, "", perr)
	if err != nil {
		return nil, err
	}
	p := &Profile{Name: f.Name, File: name, CommandEnding: f.CommandEnding, ReplyEnding: f.ReplyEnding,
		Timeout: f.Timeout, Keepalive: f.Keepalive, bools: defaultBooleans, codes: map[int64]error{}, ops: map[string]*Operation{}}
	if p.Name == "" {
		return nil, perr(root.Line, "name", errors.New("required"))
	}
	for field, ending := range map[string]*string{"command_ending": &p.CommandEnding, "reply_ending": &p.ReplyEnding} {
		if *ending == "" {
			*ending = "\n"
		}
		if !slices.Contains([]string{"\n", "\r\n", "\r"}, *ending) {
			return nil, perr(lines[field], field, fmt.Errorf("%q: use \"\\n\", \"\\r\\n\" or \"\\r\"", *ending))
		}
	}
	if p.Timeout == 0 {
		p.Timeout = time.Second
	}
	if p.Timeout < time.Millisecond || p.Timeout > time.Minute {
		return nil, perr(lines["timeout"], "timeout", fmt.Errorf("%v: must be within [1ms, 1m] (write units: 500ms, 2s)", p.Timeout))
	}
	if p.Keepalive != 0 && (p.Keepalive < 100*time.Millisecond || p.Keepalive > time.Hour) {
		return nil, perr(lines["keepalive"], "keepalive", fmt.Errorf("%v: must be within [100ms, 1h]", p.Keepalive))
	}
	if f.Booleans != nil {
		if len(f.Booleans.True) == 0 || len(f.Booleans.False) == 0 {
			return nil, perr(lines["booleans"], "booleans", errors.New("needs both true and false words"))
		}
		p.bools = *f.Booleans
	}
	if f.ErrorReply != "" {
		if p.errorReply, err = compileReply(f.ErrorReply, map[string]kind{"code": kindInt, "message": kindText}, nil, nil, ""); err != nil {
			return nil, perr(lines["error_reply"], "error_reply", err)
		}
	}
	for key, list := range f.ErrorCodes {
		sentinel, ok := errorSentinels[key]
		if !ok {
			return nil, perr(lines["error_codes"], "error_codes."+key, errors.New("unknown; use out_of_range, unknown_axis or interlock_open"))
		}
		for _, c := range list {
			p.codes[c] = sentinel
		}
	}
	if f.Instrument.Kind == 0 {
		return nil, perr(root.Line, "instrument", errors.New("required: the instrument's axes and channels"))
	}
	if err := p.parseInstrument(&f.Instrument, perr); err != nil {
		return nil, err
	}
	if f.Operations.Kind == 0 {
		return nil, perr(root.Line, "operations", errors.New("required"))
	}
	if err := p.parseOperations(lines["operations"], &f.Operations, perr); err != nil {
		return nil, err
	}
	return p, nil
}

// decodeStrict decodes a mapping node into the struct v, refusing keys v has no field for, and returns the
// line of each key. where is the field path of the mapping, for errors.
func decodeStrict(n *yaml.Node, v any, where string, perr perrFunc) (map[string]int, error) {
	if n.Kind != yaml.MappingNode {
		return nil, perr(n.Line, fieldPath(where, ""), fmt.Errorf("want a mapping (key: value lines), got %s", kindOf(n)))
	}
	known := map[string]bool{}
	t := reflect.TypeOf(v).Elem()
	for i := range t.NumField() {
		tag, _, _ := strings.Cut(t.Field(i).Tag.Get("yaml"), ",")
		known[tag] = true
	}
	lines := map[string]int{}
	for i := 0; i+1 < len(n.Content); i += 2 {
		k := n.Content[i]
		if !known[k.Value] {
			return nil, perr(k.Line, fieldPath(where, k.Value), fmt.Errorf("unknown field %q", k.Value))
		}
		lines[k.Value] = k.Line
	}
	if err := n.Decode(v); err != nil {
		line, msg := n.Line, err.Error()
		var te *yaml.TypeError
		if errors.As(err, &te) && len(te.Errors) > 0 {
			if m := lineMessage.FindStringSubmatch(te.Errors[0]); m != nil {
				line, _ = strconv.Atoi(m[1])
				msg = m[2]
			}
		}
		field := fieldPath(where, "")
		for key, l := range lines {
			if l == line {
				field = fieldPath(where, key)
			}
		}
		return nil, perr(line, field, errors.New(msg))
	}
	return lines, nil
}

var lineMessage = regexp.MustCompile(`^line (\d+): (.*)$`)

// fieldPath joins a mapping's path and a key: "operations.move" + "units".
func fieldPath(where, key string) string {
	switch {
	case where == "" && key == "":
		return "(top level)"
	case where == "":
		return key
	case key == "":
		return where
	}
	return where + "." + key
}

func kindOf(n *yaml.Node) string {
	switch n.Kind {
	case yaml.SequenceNode:
		return "a list"
	case yaml.ScalarNode:
		return fmt.Sprintf("%q", n.Value)
	}
	return "something else"
}
