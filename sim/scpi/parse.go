// Package scpi puts the simulated instrument behind goniod's own line protocol (docs/protocol.md): SCPI
// syntax, one LF-terminated line per command, every command answered, an error queue and a host keepalive.
// It parses and executes commands, serves them on a pseudo-terminal or a serial port with the pacing of a
// real line, and injects faults (a dropped link, a stalled or garbled reply, line noise, an open door) for tests.
package scpi

import (
	"strconv"
	"strings"
)

// MaxLine is the longest command line the instrument accepts, terminator excluded.
const MaxLine = 256

// Command is one parsed command line.
type Command struct {
	// Header holds the mnemonics as sent, upper-cased: ["SOUR", "TUBE"], or ["*IDN"] for a common command.
	Header []string
	Query  bool
	// Params are the comma-separated parameters, trimmed.
	Params []string
}

// Parse reads one command line (without its terminator). Errors are *Error with the SCPI error code.
func Parse(line string) (Command, error) {
	line = strings.Trim(line, " \t\r")
	for i := 0; i < len(line); i++ {
		if c := line[i]; (c < 0x20 || c > 0x7e) && c != '\t' {
			return Command{}, errorf(codeInvalidCharacter, "byte 0x%02x at column %d", c, i+1)
		}
	}
	if line == "" {
		return Command{}, errorf(codeSyntax, "empty command")
	}
	header, rest, _ := strings.Cut(strings.ReplaceAll(line, "\t", " "), " ")
	cmd, err := parseHeader(header)
	if err != nil {
		return Command{}, err
	}
	if rest = strings.TrimSpace(rest); rest != "" {
		for p := range strings.SplitSeq(rest, ",") {
			p = strings.TrimSpace(p)
			if p == "" {
				return Command{}, errorf(codeSyntax, "empty parameter")
			}
			if err := checkParam(p); err != nil {
				return Command{}, err
			}
			cmd.Params = append(cmd.Params, p)
		}
	}
	return cmd, nil
}

// parseHeader reads a common header (*IDN?) or a compound one (:SOURce:TUBE?).
func parseHeader(h string) (Command, error) {
	var cmd Command
	if strings.HasSuffix(h, "?") {
		cmd.Query, h = true, h[:len(h)-1]
	}
	if strings.HasPrefix(h, "*") {
		if !isMnemonic(h[1:]) {
			return Command{}, errorf(codeSyntax, "bad common command header %q", h)
		}
		cmd.Header = []string{strings.ToUpper(h)}
		return cmd, nil
	}
	h = strings.TrimPrefix(h, ":")
	for m := range strings.SplitSeq(h, ":") {
		if !isMnemonic(m) {
			return Command{}, errorf(codeSyntax, "bad header %q", h)
		}
		cmd.Header = append(cmd.Header, strings.ToUpper(m))
	}
	return cmd, nil
}

// isMnemonic is a letter followed by at most 11 letters, digits or underscores.
func isMnemonic(m string) bool {
	if m == "" || len(m) > 12 || !isLetter(m[0]) {
		return false
	}
	for i := 1; i < len(m); i++ {
		if c := m[i]; !isLetter(c) && !isDigit(c) && c != '_' {
			return false
		}
	}
	return true
}

// checkParam accepts character and numeric program data: letters, digits, '.', '+', '-', '_'.
func checkParam(p string) error {
	for i := 0; i < len(p); i++ {
		if c := p[i]; !isLetter(c) && !isDigit(c) && !strings.ContainsRune(".+-_", rune(c)) {
			if c == ';' {
				return errorf(codeSyntax, "one command per line (no ';')")
			}
			return errorf(codeSyntax, "character %q not allowed in parameter %q", c, p)
		}
	}
	return nil
}

func isLetter(c byte) bool { return c >= 'A' && c <= 'Z' || c >= 'a' && c <= 'z' }
func isDigit(c byte) bool  { return c >= '0' && c <= '9' }

// number reads decimal numeric data: digits with an optional sign, point and exponent; no Inf, NaN or hex.
func number(p string) (float64, error) {
	s := strings.TrimLeft(p, "+-")
	mant, exp, hasExp := strings.Cut(strings.ToUpper(s), "E")
	digits := strings.Replace(mant, ".", "", 1)
	ok := len(s)+1 >= len(p) && digits != "" && allDigits(digits)
	if hasExp {
		e := strings.TrimLeft(exp, "+-")
		ok = ok && len(e)+1 >= len(exp) && e != "" && allDigits(e)
	}
	if !ok {
		return 0, errorf(codeDataType, "%q is not a number", p)
	}
	v, err := strconv.ParseFloat(p, 64)
	if err != nil {
		return 0, errorf(codeDataType, "%q is not a number", p)
	}
	return v, nil
}

func allDigits(s string) bool {
	for i := 0; i < len(s); i++ {
		if !isDigit(s[i]) {
			return false
		}
	}
	return true
}

// boolean reads ON, OFF, 1 or 0.
func boolean(p string) (bool, error) {
	switch strings.ToUpper(p) {
	case "ON", "1":
		return true, nil
	case "OFF", "0":
		return false, nil
	}
	return false, errorf(codeIllegalValue, "%q: use ON, OFF, 1 or 0", p)
}

// node is one level of a command header pattern: its short and long form, and whether it may be left out.
type node struct {
	short, long string
	optional    bool
}

// compilePattern turns "SYSTem:ERRor[:NEXT]" into nodes; the short form is the upper-case part.
func compilePattern(p string) []node {
	var nodes []node
	add := func(part string, optional bool) {
		short := strings.TrimRightFunc(part, func(r rune) bool { return r >= 'a' && r <= 'z' })
		nodes = append(nodes, node{short: short, long: strings.ToUpper(part), optional: optional})
	}
	for p != "" {
		if p[0] == '[' {
			end := strings.IndexByte(p, ']')
			add(strings.TrimPrefix(p[1:end], ":"), true)
			p = p[end+1:]
			continue
		}
		p = strings.TrimPrefix(p, ":")
		end := strings.IndexAny(p, ":[")
		if end < 0 {
			end = len(p)
		}
		add(p[:end], false)
		p = p[end:]
	}
	return nodes
}

// matchHeader reports whether the mnemonics match the nodes, optional nodes left out or not.
func matchHeader(nodes []node, mn []string) bool {
	if len(nodes) == 0 {
		return len(mn) == 0
	}
	n := nodes[0]
	if len(mn) > 0 && (mn[0] == n.short || mn[0] == n.long) && matchHeader(nodes[1:], mn[1:]) {
		return true
	}
	return n.optional && matchHeader(nodes[1:], mn)
}

// matchWord matches character data against a word with a short form (the upper-case part), case-insensitively.
func matchWord(word, data string) bool {
	short := strings.TrimRightFunc(word, func(r rune) bool { return r >= 'a' && r <= 'z' })
	d := strings.ToUpper(data)
	return d == short || d == strings.ToUpper(word)
}

// formatFixed writes v with at most decimals digits after the point, trailing zeros and point dropped.
func formatFixed(v float64, decimals int) string {
	s := strconv.FormatFloat(v, 'f', decimals, 64)
	if strings.Contains(s, ".") {
		s = strings.TrimRight(strings.TrimRight(s, "0"), ".")
	}
	if s == "-0" {
		s = "0"
	}
	return s
}

// quote writes s as SCPI string data: printable ASCII in double quotes, quotes doubled.
func quote(s string) string {
	var b strings.Builder
	b.WriteByte('"')
	for _, r := range s {
		switch {
		case r == '"':
			b.WriteString(`""`)
		case r == '°':
			b.WriteString(" deg")
		case r == 'µ':
			b.WriteString("u")
		case r == '×':
			b.WriteString("x")
		case r < 0x20 || r > 0x7e:
			b.WriteByte('?')
		default:
			b.WriteRune(r)
		}
	}
	b.WriteByte('"')
	return b.String()
}
