package scpi

import (
	"context"
	"fmt"
	"io"
	"log/slog"
	"math/rand/v2"
	"strings"
	"sync"
	"time"

	"goniod/sim"
)

// Conn is the instrument's end of a line: a pseudo-terminal's master side or a serial port.
type Conn interface {
	io.ReadWriter
	// SetReadDeadline makes a blocked Read return once t has passed (a past t: at once).
	SetReadDeadline(t time.Time) error
}

// Options configure a Server.
type Options struct {
	// Baud paces the line at 10 bits per byte, as a real serial line would: a command counts as received
	// when its last byte would have arrived, a reply is written when its last byte would have been sent.
	// 0 means no pacing (a pseudo-terminal moves bytes at memory speed).
	Baud int
	// Seed of the random bytes of garbled replies and noise.
	Seed int64
	// Log for served devices and injected faults; nil: no log.
	Log *slog.Logger
}

// Server serves the protocol for one simulated instrument, on one connection at a time.
type Server struct {
	h     *Handler
	inst  *sim.Instrument
	baud  int
	log   *slog.Logger
	drops chan time.Duration

	writeMu sync.Mutex // one write on the line at a time (replies and noise)

	mu        sync.Mutex
	commands  int           // commands received since the server was made
	atCommand []Fault       // faults waiting for their command
	nextReply []Fault       // faults waiting for the next reply
	timers    []*time.Timer // delayed faults
	conn      Conn          // the connection being served, for noise
	abort     context.CancelFunc
	rng       *rand.Rand
	closed    bool
}

// NewServer returns a server for inst.
func NewServer(inst *sim.Instrument, o Options) *Server {
	log := o.Log
	if log == nil {
		log = slog.New(slog.DiscardHandler)
	}
	return &Server{h: NewHandler(inst), inst: inst, baud: o.Baud, log: log, drops: make(chan time.Duration, 1),
		rng: rand.New(rand.NewPCG(uint64(o.Seed), 0x6c696e65))}
}

// DropError is what Serve returns when a Drop fault ends the connection.
type DropError struct{ For time.Duration }

func (e *DropError) Error() string { return fmt.Sprintf("link dropped for %v (injected fault)", e.For) }

// Inject injects a fault: at once, after f.After, or when command number f.AtCommand arrives.
func (s *Server) Inject(f Fault) {
	s.mu.Lock()
	defer s.mu.Unlock()
	if s.closed {
		return
	}
	switch {
	case f.AtCommand > 0:
		s.atCommand = append(s.atCommand, f)
	case f.After > 0:
		now := f
		now.After = 0
		s.timers = append(s.timers, time.AfterFunc(f.After, func() { s.Inject(now) }))
	default:
		s.applyLocked(f)
	}
}

// Close cancels the faults still waiting for their time; later injections are ignored.
func (s *Server) Close() {
	s.mu.Lock()
	defer s.mu.Unlock()
	s.closed = true
	for _, t := range s.timers {
		t.Stop()
	}
}

func (s *Server) applyLocked(f Fault) {
	s.log.Info("fault injected", "fault", f.String())
	switch f.Action {
	case Stall, Mute, Garble:
		s.nextReply = append(s.nextReply, f)
	case Drop:
		select {
		case s.drops <- f.For:
		default:
		}
	case Noise:
		if s.conn != nil {
			s.write(s.conn, s.garbage(f.Bytes, true))
		}
	case DoorOpen, DoorClose:
		s.inst.SetDoor(f.Action == DoorOpen)
	case Trip:
		s.inst.TripHighVoltage()
	}
}

// garbage returns n random bytes; unless anyByte, without LF and ending in one (a garbled reply line).
func (s *Server) garbage(n int, anyByte bool) []byte {
	b := make([]byte, n)
	for i := range b {
		b[i] = byte(s.rng.UintN(256))
		if !anyByte && b[i] == '\n' {
			b[i] = '~'
		}
	}
	if !anyByte {
		b[n-1] = '\n'
	}
	return b
}

func (s *Server) write(conn Conn, b []byte) {
	s.writeMu.Lock()
	defer s.writeMu.Unlock()
	if _, err := conn.Write(b); err != nil {
		s.log.Debug("write failed", "err", err)
	}
}

// Serve answers commands on conn until ctx ends (nil), the connection fails (its error) or a Drop fault
// fires (*DropError). It does not close conn.
func (s *Server) Serve(ctx context.Context, conn Conn) error {
	ctx, cancel := context.WithCancel(ctx)
	defer cancel()
	s.mu.Lock()
	s.conn = conn
	s.mu.Unlock()
	defer func() {
		s.mu.Lock()
		s.conn = nil
		s.mu.Unlock()
	}()
	lines := make(chan inLine, 64)
	readErr := make(chan error, 1)
	var wg sync.WaitGroup
	wg.Add(2)
	go func() { defer wg.Done(); readErr <- s.read(ctx, conn, lines) }()
	go func() { defer wg.Done(); s.execute(ctx, conn, lines) }()
	var err error
	select {
	case <-ctx.Done():
	case d := <-s.drops:
		err = &DropError{For: d}
	case err = <-readErr:
	}
	cancel()
	_ = conn.SetReadDeadline(time.Now())
	wg.Wait()
	return err
}

// inLine is a command line as it arrived.
type inLine struct {
	text    string
	first   time.Time // when its first byte was read
	n       int       // bytes on the line, terminator included
	overrun bool      // longer than MaxLine: the rest was thrown away
}

// read splits the input into lines. HALT and ABORt act here, as soon as they arrive, so they can cut short
// the command in progress; they are answered in turn like any other command.
func (s *Server) read(ctx context.Context, conn Conn, out chan<- inLine) error {
	defer close(out)
	buf := make([]byte, 512)
	var cur inLine
	var text []byte
	for {
		k, err := conn.Read(buf)
		now := time.Now()
		for _, c := range buf[:k] {
			if cur.n == 0 {
				cur.first = now
			}
			cur.n++
			if c != '\n' {
				if len(text) < MaxLine {
					text = append(text, c)
				} else {
					cur.overrun = true
				}
				continue
			}
			cur.text, text = string(text), text[:0]
			if halt, abort := immediate(cur.text); halt && !cur.overrun {
				_ = s.inst.Halt()
			} else if abort && !cur.overrun {
				s.abortCurrent()
			}
			select {
			case out <- cur:
			case <-ctx.Done():
				return nil
			}
			cur = inLine{}
		}
		if err != nil {
			if ctx.Err() != nil {
				return nil
			}
			return fmt.Errorf("read: %w", err)
		}
	}
}

func (s *Server) abortCurrent() {
	s.mu.Lock()
	defer s.mu.Unlock()
	if s.abort != nil {
		s.abort()
	}
}

// execute answers the lines one after another.
func (s *Server) execute(ctx context.Context, conn Conn, lines <-chan inLine) {
	p := newPacer(s.baud)
	for l := range lines {
		if p.on() && sleepUntil(ctx, p.arrive(l.first, l.n)) != nil {
			return
		}
		if strings.Trim(l.text, " \t\r") == "" && !l.overrun {
			continue
		}
		reply := s.answer(ctx, l)
		if ctx.Err() != nil {
			return
		}
		out, hold, mute := s.shape(reply)
		if hold > 0 && sleepUntil(ctx, time.Now().Add(hold)) != nil {
			return
		}
		if mute {
			continue
		}
		if p.on() && sleepUntil(ctx, p.send(time.Now(), len(out))) != nil {
			return
		}
		s.write(conn, out)
	}
}

// answer counts the command, applies the faults waiting for it, and runs it.
func (s *Server) answer(ctx context.Context, l inLine) string {
	cctx, cancel := context.WithCancel(ctx)
	defer cancel()
	s.mu.Lock()
	s.commands++
	keep := s.atCommand[:0]
	for _, f := range s.atCommand {
		if f.AtCommand == s.commands {
			s.applyLocked(f)
		} else {
			keep = append(keep, f)
		}
	}
	s.atCommand = keep
	s.abort = cancel
	s.mu.Unlock()
	defer func() {
		s.mu.Lock()
		s.abort = nil
		s.mu.Unlock()
	}()
	if l.overrun {
		return s.h.fail(errorf(codeInputOverrun, "command longer than %d bytes", MaxLine))
	}
	return s.h.Execute(cctx, l.text)
}

// shape applies the faults waiting for the next reply: how long to hold it, whether to send it at all, and
// its bytes.
func (s *Server) shape(reply string) (out []byte, hold time.Duration, mute bool) {
	out = []byte(reply + "\n")
	s.mu.Lock()
	defer s.mu.Unlock()
	for _, f := range s.nextReply {
		switch f.Action {
		case Stall:
			hold += f.For
		case Mute:
			mute = true
		case Garble:
			out = s.garbage(8+s.rng.IntN(32), false)
		}
	}
	s.nextReply = nil
	return out, hold, mute
}

// pacer keeps the time of a simulated serial line: 10 bits per byte (start, 8 data, stop) each way.
type pacer struct {
	byteTime        time.Duration
	inFree, outFree time.Time // when each direction of the line is next free
}

func newPacer(baud int) *pacer {
	if baud <= 0 {
		return &pacer{}
	}
	return &pacer{byteTime: time.Duration(10 * float64(time.Second) / float64(baud))}
}

func (p *pacer) on() bool { return p.byteTime > 0 }

// arrive returns when a line of n bytes whose first byte was seen at first has fully arrived.
func (p *pacer) arrive(first time.Time, n int) time.Time { return p.take(&p.inFree, first, n) }

// send returns when a reply of n bytes, begun at now or when the line is free, has fully gone out.
func (p *pacer) send(now time.Time, n int) time.Time { return p.take(&p.outFree, now, n) }

// take holds one direction of the line for n bytes from start, or from when it is next free.
func (p *pacer) take(free *time.Time, start time.Time, n int) time.Time {
	if free.After(start) {
		start = *free
	}
	*free = start.Add(time.Duration(n) * p.byteTime)
	return *free
}

// sleepUntil waits until t or until ctx ends; the last millisecond is slept precisely where the system can.
func sleepUntil(ctx context.Context, t time.Time) error {
	if d := time.Until(t); d > 2*time.Millisecond {
		tm := time.NewTimer(d - 1500*time.Microsecond)
		select {
		case <-ctx.Done():
			tm.Stop()
			return ctx.Err()
		case <-tm.C:
		}
	}
	if d := time.Until(t); d > 0 {
		preciseSleep(d)
	}
	return ctx.Err()
}
