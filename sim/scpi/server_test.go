//go:build linux

package scpi

import (
	"bytes"
	"context"
	"errors"
	"os"
	"path/filepath"
	"strings"
	"sync"
	"testing"
	"time"

	goserial "go.bug.st/serial"

	"goniod/sim"
)

// host is the test's end of the line: go.bug.st/serial on the pseudo-terminal, as the driver uses it.
type host struct {
	t    *testing.T
	port goserial.Port
	buf  []byte
}

// commandCount is how many commands the server has received.
func (s *Server) commandCount() int {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.commands
}

func openHost(t *testing.T, path string) *host {
	t.Helper()
	p, err := goserial.Open(path, &goserial.Mode{BaudRate: 115200})
	if err != nil {
		t.Fatalf("open %s: %v", path, err)
	}
	t.Cleanup(func() { p.Close() })
	return &host{t: t, port: p}
}

// line reads one reply line; ok is false when none came within wait. A read timeout is (0, nil).
func (h *host) line(wait time.Duration) (string, bool) {
	h.t.Helper()
	deadline := time.Now().Add(wait)
	chunk := make([]byte, 256)
	for {
		if i := bytes.IndexByte(h.buf, '\n'); i >= 0 {
			l := string(h.buf[:i])
			h.buf = h.buf[i+1:]
			return l, true
		}
		left := time.Until(deadline)
		if left <= 0 {
			return "", false
		}
		if err := h.port.SetReadTimeout(min(left, 20*time.Millisecond)); err != nil {
			h.t.Fatal(err)
		}
		n, err := h.port.Read(chunk)
		if err != nil {
			h.t.Fatalf("read: %v", err)
		}
		h.buf = append(h.buf, chunk[:n]...)
	}
}

func (h *host) send(cmd string) {
	h.t.Helper()
	if _, err := h.port.Write([]byte(cmd + "\n")); err != nil {
		h.t.Fatalf("write %q: %v", cmd, err)
	}
}

// ask sends a command and returns its reply.
func (h *host) ask(cmd string) string {
	h.t.Helper()
	h.send(cmd)
	l, ok := h.line(2 * time.Second)
	if !ok {
		h.t.Fatalf("%s: no reply in 2 s", cmd)
	}
	return l
}

// served is a server on a pseudo-terminal with a host connected.
type served struct {
	srv  *Server
	host *host
	link string
	mu   sync.Mutex
	seen []string // announced device paths
}

func (s *served) announced() []string {
	s.mu.Lock()
	defer s.mu.Unlock()
	return append([]string(nil), s.seen...)
}

// serve starts ServePTY for inst with a link in a temporary directory and connects a host to the link.
func serve(t *testing.T, inst *sim.Instrument, o Options) *served {
	t.Helper()
	s := &served{srv: NewServer(inst, o), link: filepath.Join(t.TempDir(), "tty")}
	ctx, cancel := context.WithCancel(context.Background())
	done := make(chan error, 1)
	go func() {
		done <- s.srv.ServePTY(ctx, PTYOptions{Link: s.link, Announce: func(p string) {
			s.mu.Lock()
			s.seen = append(s.seen, p)
			s.mu.Unlock()
		}})
	}()
	t.Cleanup(func() {
		cancel()
		s.srv.Close()
		if err := <-done; err != nil {
			t.Errorf("ServePTY: %v", err)
		}
	})
	waitLink(t, s.link)
	s.host = openHost(t, s.link)
	return s
}

func waitLink(t *testing.T, link string) {
	t.Helper()
	for range 200 {
		if _, err := os.Stat(link); err == nil {
			return
		}
		time.Sleep(10 * time.Millisecond)
	}
	t.Fatalf("no device at %s after 2 s", link)
}

func TestServePTY(t *testing.T) {
	s := serve(t, newInstrument(t, sim.Config{}), Options{})
	if got := s.host.ask("*IDN?"); got != "goniod,simulated spectrometer,Cu-LiF(200),seed 3" {
		t.Errorf("*IDN? = %q", got)
	}
	target, err := os.Readlink(s.link)
	if err != nil || !strings.HasPrefix(target, "/dev/pts/") {
		t.Errorf("link %s -> %q, %v; want a /dev/pts device", s.link, target, err)
	}
	if got := s.announced(); len(got) != 1 || got[0] != target {
		t.Errorf("announced %v, want [%s]", got, target)
	}
	// All 256 byte values pass the raw line: a garbled command is answered with an error, not echoed.
	s.host.send("MOVE THET,\x03\xff\x00")
	if l, _ := s.host.line(2 * time.Second); !strings.HasPrefix(l, "ERR -101,") {
		t.Errorf("control bytes in a command: reply %q, want ERR -101", l)
	}
	s.host.send(strings.Repeat("A", MaxLine+50))
	if l, _ := s.host.line(2 * time.Second); !strings.HasPrefix(l, "ERR -363,") {
		t.Errorf("overlong line: reply %q, want ERR -363", l)
	}
	s.host.send("")
	if got := s.host.ask("SYST:ECHO? 17"); got != "17" {
		t.Errorf("after a blank line (no reply): SYST:ECHO? 17 = %q", got)
	}
}

func TestReplyFaults(t *testing.T) {
	s := serve(t, newInstrument(t, sim.Config{}), Options{Seed: 1})
	h := s.host

	s.srv.Inject(Fault{Action: Garble})
	if got := h.ask("SYST:ECHO? 1"); got == "1" || len(got) < 7 {
		t.Errorf("garbled reply = %q, want random bytes", got)
	}
	if got := h.ask("SYST:ECHO? 2"); got != "2" {
		t.Errorf("after a garbled reply: %q, want 2", got)
	}

	s.srv.Inject(Fault{Action: Mute})
	h.send("SYST:ECHO? 3")
	if l, ok := h.line(300 * time.Millisecond); ok {
		t.Errorf("muted reply arrived: %q", l)
	}
	if got := h.ask("SYST:ECHO? 4"); got != "4" {
		t.Errorf("after a muted reply: %q, want 4", got)
	}

	s.srv.Inject(Fault{Action: Stall, For: 300 * time.Millisecond})
	start := time.Now()
	if got := h.ask("SYST:ECHO? 5"); got != "5" || time.Since(start) < 300*time.Millisecond {
		t.Errorf("stalled reply %q after %v, want 5 after at least 300ms", got, time.Since(start))
	}

	s.srv.Inject(Fault{Action: Noise, Bytes: 20})
	deadline := time.Now().Add(2 * time.Second)
	chunk := make([]byte, 64)
	var got []byte
	for len(got) < 20 && time.Now().Before(deadline) {
		_ = h.port.SetReadTimeout(20 * time.Millisecond)
		n, _ := h.port.Read(chunk)
		got = append(got, chunk[:n]...)
	}
	if len(got) != 20 {
		t.Errorf("noise: read %d bytes, want 20", len(got))
	}

	s.srv.Inject(Fault{Action: Garble, AtCommand: s.srv.commandCount() + 2})
	if got := h.ask("SYST:ECHO? 6"); got != "6" {
		t.Errorf("command before the scheduled fault: %q", got)
	}
	if got := h.ask("SYST:ECHO? 7"); got == "7" {
		t.Error("the reply to the scheduled command was not garbled")
	}
}

func TestInstrumentFaults(t *testing.T) {
	s := serve(t, newInstrument(t, sim.Config{}), Options{})
	h := s.host
	h.ask("SOUR:HVOL ON")
	s.srv.Inject(Fault{Action: DoorOpen})
	if got := h.ask("SAFE?"); got != "0,0" {
		t.Errorf("door open: SAFE? = %q, want 0,0 (high voltage dropped, interlock open)", got)
	}
	if got := h.ask("SOUR:HVOL ON"); !strings.HasPrefix(got, "ERR 201,") {
		t.Errorf("high voltage on with the door open: %q, want ERR 201", got)
	}
	s.srv.Inject(Fault{Action: DoorClose})
	h.ask("SOUR:HVOL ON")
	s.srv.Inject(Fault{Action: Trip, After: 50 * time.Millisecond})
	time.Sleep(200 * time.Millisecond)
	if got := h.ask("SAFE?"); got != "0,1" {
		t.Errorf("after a trip: SAFE? = %q, want 0,1", got)
	}
}

func TestDrop(t *testing.T) {
	s := serve(t, newInstrument(t, sim.Config{}), Options{})
	first, _ := os.Readlink(s.link)
	s.srv.Inject(Fault{Action: Drop, For: 300 * time.Millisecond})
	chunk := make([]byte, 16)
	_ = s.host.port.SetReadTimeout(2 * time.Second)
	if _, err := s.host.port.Read(chunk); err == nil {
		t.Fatal("the host's read did not fail when the device vanished")
	}
	if _, err := os.Lstat(s.link); !errors.Is(err, os.ErrNotExist) {
		t.Errorf("link still there while the device is gone: %v", err)
	}
	s.host.port.Close()
	waitLink(t, s.link)
	h := openHost(t, s.link)
	if got := h.ask("SYST:ECHO? 9"); got != "9" {
		t.Errorf("after the device came back: %q", got)
	}
	if got := s.announced(); len(got) != 2 || got[0] != first {
		t.Errorf("announced %v, want two devices, the first %s", got, first)
	}
}

// TestImmediateCommands: HALT and ABORt act while a count is in progress.
func TestImmediateCommands(t *testing.T) {
	for _, tc := range []struct{ cmd, reason, safe string }{
		{"HALT", "halted", "0,1"},
		{"ABOR", "aborted", "1,1"},
	} {
		t.Run(tc.cmd, func(t *testing.T) {
			in, err := sim.New(sim.Config{Seed: 1, Speed: 1}, nil)
			if err != nil {
				t.Fatal(err)
			}
			s := serve(t, in, Options{})
			h := s.host
			h.ask("SOUR:HVOL ON")
			h.send("COUN? 100")
			time.Sleep(100 * time.Millisecond)
			start := time.Now()
			h.send(tc.cmd)
			if l, _ := h.line(time.Second); !strings.HasPrefix(l, "ERR 202,") || !strings.Contains(l, tc.reason) {
				t.Errorf("count cut short by %s: reply %q, want ERR 202 %s", tc.cmd, l, tc.reason)
			}
			if l, _ := h.line(time.Second); l != "OK" {
				t.Errorf("%s reply %q, want OK", tc.cmd, l)
			}
			if d := time.Since(start); d > 500*time.Millisecond {
				t.Errorf("%s took %v to act", tc.cmd, d)
			}
			if got := h.ask("SAFE?"); got != tc.safe {
				t.Errorf("after %s: SAFE? = %q, want %s", tc.cmd, got, tc.safe)
			}
		})
	}
}

// TestPacing: at 9600 baud a round trip takes the wire time of its bytes (10 bits a byte), not memory speed.
func TestPacing(t *testing.T) {
	s := serve(t, newInstrument(t, sim.Config{}), Options{Baud: 9600})
	const cmd, reply = "SYST:ECHO? 123456789", "123456789" // 21 + 10 bytes with their LFs
	wire := time.Duration(21+10) * 10 * time.Second / 9600 // about 32 ms
	s.host.ask(cmd)
	for range 3 {
		start := time.Now()
		if got := s.host.ask(cmd); got != reply {
			t.Fatalf("%s = %q", cmd, got)
		}
		d := time.Since(start)
		if d < wire || d > wire+15*time.Millisecond {
			t.Errorf("round trip %v at 9600 baud, want the wire time %v (+15 ms at most)", d, wire)
		}
	}
}

func TestParseFault(t *testing.T) {
	good := map[string]Fault{
		"drop":            {Action: Drop, For: time.Second},
		"@2s drop=500ms":  {Action: Drop, For: 500 * time.Millisecond, After: 2 * time.Second},
		"#40 stall=3s":    {Action: Stall, For: 3 * time.Second, AtCommand: 40},
		"stall":           {Action: Stall, For: 5 * time.Second},
		"mute":            {Action: Mute},
		"GARBLE":          {Action: Garble},
		"noise=8":         {Action: Noise, Bytes: 8},
		"door=open":       {Action: DoorOpen},
		"@1m door=closed": {Action: DoorClose, After: time.Minute},
		"#1 trip":         {Action: Trip, AtCommand: 1},
	}
	for s, want := range good {
		got, err := ParseFault(s)
		if err != nil || got != want {
			t.Errorf("ParseFault(%q) = %+v, %v; want %+v", s, got, err, want)
		}
		if again, err := ParseFault(got.String()); err != nil || again != got {
			t.Errorf("ParseFault(%q).String() = %q reads back as %+v, %v", s, got.String(), again, err)
		}
	}
	for _, s := range []string{"", "explode", "drop=soon", "stall=-1s", "noise=0", "noise=99999", "door=ajar",
		"mute=1", "#0 drop", "@-1s drop", "2s drop", "@1s #2 drop", "#x garble"} {
		if f, err := ParseFault(s); err == nil {
			t.Errorf("ParseFault(%q) = %+v, want an error", s, f)
		}
	}
}

// TestServePort: on a named serial port (here the slave side of a pseudo-terminal, opened through
// go.bug.st/serial as a real port would be) the server answers; the test is the host on the other side.
func TestServePort(t *testing.T) {
	p, err := OpenPTY()
	if err != nil {
		t.Fatal(err)
	}
	defer p.Close()
	srv := NewServer(newInstrument(t, sim.Config{}), Options{})
	ctx, cancel := context.WithCancel(context.Background())
	done := make(chan error, 1)
	go func() { done <- srv.ServePort(ctx, p.Path, 115200) }()
	defer func() {
		cancel()
		if err := <-done; err != nil {
			t.Errorf("ServePort: %v", err)
		}
	}()
	hostEnd := p.Conn()
	if _, err := hostEnd.Write([]byte("SYST:ECHO? 42\n")); err != nil {
		t.Fatal(err)
	}
	var got []byte
	buf := make([]byte, 64)
	_ = hostEnd.SetReadDeadline(time.Now().Add(3 * time.Second))
	for !bytes.Contains(got, []byte("\n")) {
		n, err := hostEnd.Read(buf)
		if err != nil {
			t.Fatalf("read %q: %v", got, err)
		}
		got = append(got, buf[:n]...)
	}
	if string(got) != "42\n" {
		t.Errorf("reply %q, want 42", got)
	}
}
