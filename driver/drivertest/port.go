package drivertest

import (
	"bytes"
	"errors"
	"io"
	"strings"
	"sync"
	"testing"
	"time"
)

// Port is a serial port as a line driver uses it; go.bug.st/serial's Port has these methods, and so do
// Player and Recorder.
type Port interface {
	io.ReadWriteCloser
	// SetReadTimeout bounds each Read; a Read that times out returns (0, nil).
	SetReadTimeout(d time.Duration) error
	// ResetInputBuffer throws away bytes received and not yet read.
	ResetInputBuffer() error
}

// ErrVanished is what a Player's Read and Write return once the transcript closed the device.
var ErrVanished = errors.New("drivertest: device vanished (transcript !close)")

// Player is a fake serial port that plays the device's side of a transcript: each line the host writes must
// be the next "> " entry, and is answered with that entry's reply. At the end of the test it fails the test
// if a recorded exchange went unused.
type Player struct {
	t  Reporter
	tr *Transcript

	mu      sync.Mutex
	next    int
	in      []byte // host bytes not yet making a full line
	out     []byte // device bytes not yet read
	timeout time.Duration
	gone    bool
	closed  bool
}

// Reporter is where a Player reports mismatches: a *testing.T.
type Reporter interface {
	Helper()
	Errorf(format string, args ...any)
	Cleanup(func())
}

var _ Reporter = (testing.TB)(nil)

// NewPlayer returns a port that plays tr.
func NewPlayer(t Reporter, tr *Transcript) *Player {
	t.Helper()
	p := &Player{t: t, tr: tr, timeout: time.Second}
	t.Cleanup(func() {
		p.mu.Lock()
		defer p.mu.Unlock()
		if p.next < len(tr.Steps) {
			st := tr.Steps[p.next]
			t.Errorf("transcript %s: %d recorded exchanges unused, the first at line %d: > %s", tr.Name, len(tr.Steps)-p.next, st.Line, st.Send)
		}
	})
	return p
}

// Write takes the host's bytes; each complete line is checked against the transcript and answered.
func (p *Player) Write(b []byte) (int, error) {
	p.mu.Lock()
	defer p.mu.Unlock()
	if p.gone || p.closed {
		return 0, ErrVanished
	}
	p.in = append(p.in, b...)
	for {
		line, rest, ok := bytes.Cut(p.in, []byte("\n"))
		if !ok {
			return len(b), nil
		}
		p.in = rest
		p.answer(strings.TrimRight(string(line), "\r"))
	}
}

func (p *Player) answer(line string) {
	if p.next >= len(p.tr.Steps) {
		p.t.Errorf("transcript %s: the host sent %q after the last recorded exchange", p.tr.Name, line)
		return
	}
	st := p.tr.Steps[p.next]
	p.next++
	if line != st.Send {
		p.t.Errorf("transcript %s line %d: the host sent %q, want %q", p.tr.Name, st.Line, line, st.Send)
	}
	p.out = append(p.out, st.Reply...)
	p.gone = st.Close
}

// Read returns the device's pending bytes; with none it waits out the read timeout and returns (0, nil), as
// a serial port does.
func (p *Player) Read(b []byte) (int, error) {
	p.mu.Lock()
	if len(p.out) > 0 {
		n := copy(b, p.out)
		p.out = p.out[n:]
		p.mu.Unlock()
		return n, nil
	}
	gone, closed, wait := p.gone, p.closed, p.timeout
	p.mu.Unlock()
	if gone || closed {
		return 0, ErrVanished
	}
	time.Sleep(wait)
	return 0, nil
}

// SetReadTimeout sets how long a Read waits when the device has nothing to say.
func (p *Player) SetReadTimeout(d time.Duration) error {
	p.mu.Lock()
	defer p.mu.Unlock()
	p.timeout = d
	return nil
}

// ResetInputBuffer drops device bytes not yet read.
func (p *Player) ResetInputBuffer() error {
	p.mu.Lock()
	defer p.mu.Unlock()
	p.out = nil
	return nil
}

// Close closes the port.
func (p *Player) Close() error {
	p.mu.Lock()
	defer p.mu.Unlock()
	p.closed = true
	return nil
}

// Recorder wraps a port and records a transcript of the conversation on it: the lines the host wrote and
// the bytes it read. Bytes the host flushed unread are not recorded.
type Recorder struct {
	Port
	mu   sync.Mutex
	tr   Transcript
	sent []byte
}

// NewRecorder records the conversation on p under the given transcript name.
func NewRecorder(p Port, name string) *Recorder {
	return &Recorder{Port: p, tr: Transcript{Name: name}}
}

func (r *Recorder) Write(b []byte) (int, error) {
	n, err := r.Port.Write(b)
	r.mu.Lock()
	defer r.mu.Unlock()
	r.sent = append(r.sent, b[:n]...)
	for {
		line, rest, ok := bytes.Cut(r.sent, []byte("\n"))
		if !ok {
			break
		}
		r.sent = rest
		r.tr.Steps = append(r.tr.Steps, Step{Send: strings.TrimRight(string(line), "\r")})
	}
	return n, err
}

func (r *Recorder) Read(b []byte) (int, error) {
	n, err := r.Port.Read(b)
	r.mu.Lock()
	defer r.mu.Unlock()
	if len(r.tr.Steps) > 0 {
		st := &r.tr.Steps[len(r.tr.Steps)-1]
		st.Reply = append(st.Reply, b[:n]...)
		st.Close = st.Close || err != nil
	}
	return n, err
}

// Transcript returns what was recorded so far.
func (r *Recorder) Transcript() *Transcript {
	r.mu.Lock()
	defer r.mu.Unlock()
	t := &Transcript{Name: r.tr.Name, Steps: make([]Step, len(r.tr.Steps))}
	for i, st := range r.tr.Steps {
		st.Reply = bytes.Clone(st.Reply)
		t.Steps[i] = st
	}
	return t
}
