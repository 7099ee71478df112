package drivertest

import (
	"bytes"
	"errors"
	"fmt"
	"strings"
	"testing"
	"time"
)

const sample = `# comment
> *IDN?
< goniod,simulated spectrometer,Cu-LiF(200),seed 3

> MOVE THET,1
<q "\x00\xff1\n"
< 1
> COUN? 0
<!
> SAFE?
!close
`

func TestTranscriptRoundTrip(t *testing.T) {
	tr, err := ParseTranscript("sample", strings.NewReader(sample))
	if err != nil {
		t.Fatal(err)
	}
	want := []Step{
		{Line: 2, Send: "*IDN?", Reply: []byte("goniod,simulated spectrometer,Cu-LiF(200),seed 3\n")},
		{Line: 5, Send: "MOVE THET,1", Reply: []byte("\x00\xff1\n1\n")},
		{Line: 8, Send: "COUN? 0"},
		{Line: 10, Send: "SAFE?", Close: true},
	}
	if fmt.Sprint(tr.Steps) != fmt.Sprint(want) {
		t.Fatalf("steps = %+v\nwant %+v", tr.Steps, want)
	}
	var b bytes.Buffer
	if err := tr.Format(&b); err != nil {
		t.Fatal(err)
	}
	again, err := ParseTranscript("formatted", &b)
	if err != nil {
		t.Fatal(err)
	}
	for i := range want {
		again.Steps[i].Line = want[i].Line
	}
	if fmt.Sprint(again.Steps) != fmt.Sprint(want) {
		t.Errorf("formatted and read back: %+v", again.Steps)
	}
	for _, bad := range []string{"< reply before a command\n", "> X\n<q not-quoted\n", "> X\n? what\n"} {
		if _, err := ParseTranscript("bad", strings.NewReader(bad)); err == nil {
			t.Errorf("ParseTranscript(%q) accepted", bad)
		}
	}
}

// reporter collects what a Player reports.
type reporter struct {
	errs    []string
	cleanup []func()
}

func (r *reporter) Helper() {}
func (r *reporter) Errorf(format string, a ...any) {
	r.errs = append(r.errs, fmt.Sprintf(format, a...))
}
func (r *reporter) Cleanup(f func()) { r.cleanup = append(r.cleanup, f) }
func (r *reporter) end() {
	for _, f := range r.cleanup {
		f()
	}
}

func TestPlayer(t *testing.T) {
	tr, err := ParseTranscript("sample", strings.NewReader(sample))
	if err != nil {
		t.Fatal(err)
	}
	r := &reporter{}
	p := NewPlayer(r, tr)
	_ = p.SetReadTimeout(time.Millisecond)
	buf := make([]byte, 64)
	if _, err := p.Write([]byte("*IDN?\r\n")); err != nil {
		t.Fatal(err)
	}
	if n, _ := p.Read(buf); string(buf[:n]) != "goniod,simulated spectrometer,Cu-LiF(200),seed 3\n" {
		t.Errorf("reply %q", buf[:n])
	}
	_, _ = p.Write([]byte("MOVE TTH,1\n"))
	if len(r.errs) != 1 || !strings.Contains(r.errs[0], `line 5: the host sent "MOVE TTH,1", want "MOVE THET,1"`) {
		t.Errorf("a wrong command was reported as %q", r.errs)
	}
	_ = p.ResetInputBuffer()
	if n, err := p.Read(buf); n != 0 || err != nil {
		t.Errorf("after a flush: read %q, %v", buf[:n], err)
	}
	r.end()
	if len(r.errs) != 2 || !strings.Contains(r.errs[1], "2 recorded exchanges unused, the first at line 8: > COUN? 0") {
		t.Errorf("unused exchanges were reported as %q", r.errs)
	}
}

func TestPlayerVanish(t *testing.T) {
	tr, err := ParseTranscript("sample", strings.NewReader("> SAFE?\n!close\n"))
	if err != nil {
		t.Fatal(err)
	}
	r := &reporter{}
	p := NewPlayer(r, tr)
	_, _ = p.Write([]byte("SAFE?\n"))
	if _, err := p.Read(make([]byte, 8)); !errors.Is(err, ErrVanished) {
		t.Errorf("read after !close: %v", err)
	}
	if _, err := p.Write([]byte("x\n")); !errors.Is(err, ErrVanished) {
		t.Errorf("write after !close: %v", err)
	}
	r.end()
	if len(r.errs) != 0 {
		t.Errorf("reported %q", r.errs)
	}
}

// TestRecorder records both directions of a conversation.
func TestRecorder(t *testing.T) {
	tr, _ := ParseTranscript("sample", strings.NewReader("> A?\n< 1\n> B?\n<q \"\\x01\\n\"\n"))
	r := &reporter{}
	rec := NewRecorder(NewPlayer(r, tr), "rec")
	buf := make([]byte, 8)
	for _, cmd := range []string{"A?", "B?"} {
		_, _ = rec.Write([]byte(cmd + "\n"))
		_, _ = rec.Read(buf)
	}
	var b bytes.Buffer
	_ = rec.Transcript().Format(&b)
	if want := "> A?\n< 1\n> B?\n<q \"\\x01\\n\"\n"; b.String() != want {
		t.Errorf("recorded %q, want %q", b.String(), want)
	}
	r.end()
}

// FuzzTranscript: the transcript parser never panics, and what it accepts formats and reads back the same.
func FuzzTranscript(f *testing.F) {
	f.Add(sample)
	f.Add("> A\n<q \"\\x00\"\n<!\n")
	f.Add("< before\n")
	f.Fuzz(func(t *testing.T, text string) {
		tr, err := ParseTranscript("fuzz", strings.NewReader(text))
		if err != nil {
			return
		}
		var b bytes.Buffer
		if err := tr.Format(&b); err != nil {
			t.Fatal(err)
		}
		again, err := ParseTranscript("formatted", &b)
		if err != nil {
			t.Fatalf("formatted transcript does not read back: %v\n%s", err, b.String())
		}
		if len(again.Steps) != len(tr.Steps) {
			t.Fatalf("%d steps read back as %d", len(tr.Steps), len(again.Steps))
		}
		for i := range tr.Steps {
			a, b := tr.Steps[i], again.Steps[i]
			if a.Send != b.Send || !bytes.Equal(a.Reply, b.Reply) || a.Close != b.Close {
				t.Fatalf("step %d: %+v read back as %+v", i, a, b)
			}
		}
	})
}
