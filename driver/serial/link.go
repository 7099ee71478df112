package serial

import (
	"bytes"
	"context"
	"errors"
	"fmt"
	"log/slog"
	"strconv"
	"time"
)

// readSlice is the longest single Read: between reads the owner looks for halt requests.
const readSlice = 20 * time.Millisecond

// maxReply is the longest reply line accepted; longer means garbage on the line.
const maxReply = 4096

// failure is an exchange that went wrong on the line: the link's health counts these.
type failure struct {
	what    string // "timeout", "garbled" or "port"
	err     error
	timeout bool
	port    bool // the port itself failed (closed, vanished): the link is down at once
}

func (f *failure) Error() string { return f.err.Error() }
func (f *failure) Unwrap() error { return f.err }

// InstrumentError is a command the instrument answered with an error.
type InstrumentError struct {
	Op      string
	Code    int64
	Message string
	// sentinel is the goniod error the code means (driver.ErrOutOfRange, ...), if any.
	sentinel error
}

func (e *InstrumentError) Error() string {
	return fmt.Sprintf("instrument refused %s: error %d: %s", e.Op, e.Code, e.Message)
}

func (e *InstrumentError) Unwrap() error { return e.sentinel }

// conn is one open connection to the instrument. Only the driver's owner goroutine uses it.
type conn struct {
	port    Port
	prof    *Profile
	ending  []byte // command ending
	timeout time.Duration
	log     *slog.Logger
	halts   <-chan chan error
	halt    *Operation // sent when Halt is asked while an exchange is in progress

	buf       []byte
	needSync  bool
	token     *uint64 // last sync token, shared across connections so a stale echo never matches
	extra     int     // replies still owed to commands sent mid-exchange (halt, abort)
	lastWrite time.Time
	pos       map[string]float64 // last known motor angles, to size move timeouts
}

// readLine reads one reply line before the deadline. While it waits it sends a halt when one is asked, and
// when ctx ends it aborts the command in progress (the instrument's abort operation, if any).
func (c *conn) readLine(ctx context.Context, deadline time.Time) (string, error) {
	chunk := make([]byte, 256)
	ending := []byte(c.prof.ReplyEnding)
	for {
		if i := bytes.Index(c.buf, ending); i >= 0 {
			line := string(c.buf[:i])
			c.buf = c.buf[i+len(ending):]
			return line, nil
		}
		if len(c.buf) > maxReply {
			c.buf = nil
			return "", &failure{what: "garbled", err: fmt.Errorf("no line ending in %d bytes", maxReply)}
		}
		if err := ctx.Err(); err != nil {
			return "", err
		}
		left := time.Until(deadline)
		if left <= 0 {
			return "", &failure{what: "timeout", timeout: true, err: errors.New("no reply in time")}
		}
		if err := c.port.SetReadTimeout(min(left, readSlice)); err != nil {
			return "", &failure{what: "port", port: true, err: err}
		}
		n, err := c.port.Read(chunk)
		if err != nil {
			return "", &failure{what: "port", port: true, err: fmt.Errorf("read: %w", err)}
		}
		c.buf = append(c.buf, chunk[:n]...)
		c.serveHalt()
	}
}

// serveHalt sends the halt command at once when Halt was called during an exchange; its reply follows the
// reply of the command in progress.
func (c *conn) serveHalt() {
	select {
	case h := <-c.halts:
		err := c.write(c.halt.send.render(nil))
		if err == nil {
			c.extra++
		}
		h <- err
	default:
	}
}

// timeoutOf is an operation's reply timeout.
func (c *conn) timeoutOf(op *Operation) time.Duration {
	if op.timeout > 0 {
		return op.timeout
	}
	return c.timeout
}

func (c *conn) write(line string) error {
	c.lastWrite = time.Now()
	if _, err := c.port.Write(append([]byte(line), c.ending...)); err != nil {
		return &failure{what: "port", port: true, err: fmt.Errorf("write: %w", err)}
	}
	return nil
}

// exchange sends one command and reads its reply. It resynchronises first if an earlier exchange failed.
func (c *conn) exchange(ctx context.Context, op *Operation, vals values, wait time.Duration) ([]values, error) {
	if c.needSync {
		if err := c.resync(ctx); err != nil {
			return nil, err
		}
	}
	if err := c.port.ResetInputBuffer(); err != nil {
		return nil, &failure{what: "port", port: true, err: err}
	}
	c.buf = c.buf[:0]
	if err := c.write(op.send.render(vals)); err != nil {
		return nil, err
	}
	line, err := c.readLine(ctx, time.Now().Add(c.timeoutOf(op)+wait))
	if err != nil {
		var f *failure
		if ctx.Err() != nil || errors.As(err, &f) && f.timeout {
			if c.abort() {
				return nil, err
			}
		}
		c.needSync = true
		return nil, err
	}
	if !c.settle() {
		c.needSync = true
	}
	if ierr := c.instrumentError(op, line); ierr != nil {
		return nil, ierr
	}
	got, err := op.reply.parse(line, c.prof.bools)
	if err != nil {
		c.needSync = true
		return nil, &failure{what: "garbled", err: err}
	}
	return got, nil
}

// settle reads the replies owed to commands sent during the exchange (a halt, an abort); false when they did
// not come.
func (c *conn) settle() bool {
	for ; c.extra > 0; c.extra-- {
		if _, err := c.readLine(context.Background(), time.Now().Add(c.timeout)); err != nil {
			c.extra = 0
			return false
		}
	}
	return true
}

// abort stops the command whose reply was abandoned (ctx ended, or it timed out), so the instrument is free
// for the next one. It reports whether the instrument answered both; if not, the next exchange
// resynchronises.
func (c *conn) abort() bool {
	op := c.prof.ops["abort"]
	if op == nil || c.write(op.send.render(nil)) != nil {
		return false
	}
	c.extra += 2 // the abandoned command's reply, then the abort's own
	return c.settle()
}

// instrumentError recognises an error reply; without a code in it, the instrument's error queue is asked.
func (c *conn) instrumentError(op *Operation, line string) error {
	if c.prof.errorReply == nil {
		return nil
	}
	m, err := c.prof.errorReply.parse(line, c.prof.bools)
	if err != nil {
		return nil
	}
	e := &InstrumentError{Op: op.Name}
	if code, ok := m[0]["code"].(int64); ok {
		e.Code = code
		e.Message, _ = m[0]["message"].(string)
	} else if q := c.prof.ops["read_error"]; q != nil && op != q {
		if r, err := c.exchange(context.Background(), q, nil, 0); err == nil {
			e.Code = r[0]["code"].(int64)
			e.Message, _ = r[0]["message"].(string)
		}
	}
	if e.Message == "" {
		e.Message = line
	}
	e.sentinel = c.prof.codes[e.Code]
	return e
}

// resync brings the line back to a known state after a failed exchange: it waits until the instrument has
// stopped talking (a late reply), throws away what came, and, when the profile can, checks with a fresh
// token that the next reply is the answer to the next command.
func (c *conn) resync(ctx context.Context) error {
	deadline := time.Now().Add(c.timeout)
	chunk := make([]byte, 256)
	for time.Now().Before(deadline) {
		if err := c.port.SetReadTimeout(2 * readSlice); err != nil {
			return &failure{what: "port", port: true, err: err}
		}
		n, err := c.port.Read(chunk)
		if err != nil {
			return &failure{what: "port", port: true, err: fmt.Errorf("read: %w", err)}
		}
		if n == 0 {
			break
		}
	}
	c.buf, c.extra = c.buf[:0], 0 // replies still owed were drained with the rest
	if err := c.port.ResetInputBuffer(); err != nil {
		return &failure{what: "port", port: true, err: err}
	}
	op := c.prof.ops["sync"]
	if op == nil {
		c.needSync = false
		return nil
	}
	*c.token++
	token := strconv.FormatUint(*c.token, 10)
	if err := c.write(op.send.render(values{"token": token})); err != nil {
		return err
	}
	deadline = time.Now().Add(c.timeoutOf(op))
	for {
		line, err := c.readLine(ctx, deadline)
		if err != nil {
			return err
		}
		if got, err := op.reply.parse(line, c.prof.bools); err == nil && got[0]["token"] == token {
			c.needSync = false
			return nil
		}
	}
}
