package scpi

import (
	"errors"
	"slices"
	"strings"
	"testing"
)

func TestParse(t *testing.T) {
	tests := []struct {
		line   string
		header []string
		query  bool
		params []string
		code   int
	}{
		{line: "*IDN?", header: []string{"*IDN"}, query: true},
		{line: "  :sour:tube 30, 0.8 \r", header: []string{"SOUR", "TUBE"}, params: []string{"30", "0.8"}},
		{line: "MOVE\tTHET,1e1", header: []string{"MOVE"}, params: []string{"THET", "1e1"}},
		{line: "SYST:ERR:NEXT?", header: []string{"SYST", "ERR", "NEXT"}, query: true},
		{line: "", code: codeSyntax},
		{line: "MOVE THET,\x001", code: codeInvalidCharacter},
		{line: "MOVE THET,1é", code: codeInvalidCharacter},
		{line: "SOUR::TUBE", code: codeSyntax},
		{line: "SOUR:TUBE?:X", code: codeSyntax},
		{line: "1SOUR", code: codeSyntax},
		{line: "*", code: codeSyntax},
		{line: "MOVE A,", code: codeSyntax},
		{line: `SYST:ECHO? "x"`, code: codeSyntax},
		{line: "MOVE A,1;MOVE B,2", code: codeSyntax},
		{line: "ABCDEFGHIJKLM", code: codeSyntax},
	}
	for _, tc := range tests {
		cmd, err := Parse(tc.line)
		if tc.code != 0 {
			var pe *Error
			if !errors.As(err, &pe) || pe.Code != tc.code {
				t.Errorf("Parse(%q) = %+v, %v; want error %d", tc.line, cmd, err, tc.code)
			}
			continue
		}
		if err != nil || !slices.Equal(cmd.Header, tc.header) || cmd.Query != tc.query || !slices.Equal(cmd.Params, tc.params) {
			t.Errorf("Parse(%q) = %+v, %v; want %v query=%v %v", tc.line, cmd, err, tc.header, tc.query, tc.params)
		}
	}
}

func TestNumber(t *testing.T) {
	good := map[string]float64{"1": 1, "-2.5": -2.5, "+.5": 0.5, "3.": 3, "1e-3": 1e-3, "2E+2": 200}
	for s, want := range good {
		if got, err := number(s); err != nil || got != want {
			t.Errorf("number(%q) = %v, %v; want %v", s, got, err, want)
		}
	}
	for _, s := range []string{"", ".", "-", "+-1", "1e", "1e+", "inf", "NaN", "0x10", "1_000", "1.2.3", "e5", "1e5.5"} {
		if v, err := number(s); err == nil {
			t.Errorf("number(%q) = %v, want an error", s, v)
		}
	}
}

func TestHeaderForms(t *testing.T) {
	nodes := compilePattern("SYSTem:ERRor[:NEXT]")
	for _, h := range []string{"SYST:ERR", "SYSTEM:ERROR", "SYST:ERROR:NEXT", "system:err:next"} {
		if !matchHeader(nodes, strings.Split(strings.ToUpper(h), ":")) {
			t.Errorf("%s does not match SYSTem:ERRor[:NEXT]", h)
		}
	}
	for _, h := range []string{"SYS:ERR", "SYST", "SYST:ERRO", "SYST:ERR:NEX", "SYST:NEXT"} {
		if matchHeader(nodes, strings.Split(h, ":")) {
			t.Errorf("%s matches SYSTem:ERRor[:NEXT]", h)
		}
	}
}

func TestFormatFixed(t *testing.T) {
	tests := []struct {
		v    float64
		d    int
		want string
	}{{22.5, 3, "22.5"}, {45, 3, "45"}, {20.049999999999997, 3, "20.05"}, {-0.0001, 3, "0"}, {0.201315, 6, "0.201315"}}
	for _, tc := range tests {
		if got := formatFixed(tc.v, tc.d); got != tc.want {
			t.Errorf("formatFixed(%v, %d) = %q, want %q", tc.v, tc.d, got, tc.want)
		}
	}
}

// FuzzParse: the command parser never panics, and what it accepts has a well-formed header and parameters.
func FuzzParse(f *testing.F) {
	for _, s := range []string{"*IDN?", "SOUR:TUBE 30,0.8", "MOVE THET,22.5,TTH,45", ":SYST:ERR:NEXT?", "COUN? 1e-3", "", "a;b", "\xff\x00"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, line string) {
		cmd, err := Parse(line)
		if err != nil {
			var pe *Error
			if !errors.As(err, &pe) || titles[pe.Code] == "" {
				t.Fatalf("Parse(%q): error %v is not a protocol error with a known code", line, err)
			}
			return
		}
		if len(cmd.Header) == 0 {
			t.Fatalf("Parse(%q) accepted an empty header", line)
		}
		for _, m := range cmd.Header {
			if m != strings.ToUpper(m) || m == "" || m == "*" {
				t.Fatalf("Parse(%q): mnemonic %q", line, m)
			}
		}
		for _, p := range cmd.Params {
			if p == "" || strings.ContainsAny(p, ", \t;\"") {
				t.Fatalf("Parse(%q): parameter %q", line, p)
			}
		}
	})
}

// FuzzParseFault: the fault parser (goniosim's --fault and control input) never panics, and what it accepts
// reads back the same from its String form.
func FuzzParseFault(f *testing.F) {
	for _, s := range []string{"drop", "@2s drop=500ms", "#40 stall=3s", "noise=8", "door=open", "#1 trip", "garble=x", "@ mute"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		got, err := ParseFault(s)
		if err != nil {
			return
		}
		again, err := ParseFault(got.String())
		if err != nil || again != got {
			t.Fatalf("ParseFault(%q) = %+v; its String %q reads back as %+v, %v", s, got, got.String(), again, err)
		}
	})
}
