// Package serial is goniod's driver for instruments on a serial line ("serial"): it speaks a line-oriented
// ASCII protocol described by a profile (goniod's own protocol built in), through go.bug.st/serial, with one
// goroutine owning the port, deadlines on every read, retries of idempotent operations, and reconnection.
package serial

import (
	"context"
	"errors"
	"fmt"
	"log/slog"
	"sync"
	"time"

	"goniod/driver"
)

// Driver is an instrument on a serial line. Every exchange goes through one owner goroutine, so scans,
// manual moves, state polls and keepalives never interleave on the wire.
type Driver struct {
	prof      *Profile
	set       Settings
	open      OpenFunc
	log       *slog.Logger
	keepalive time.Duration
	timeout   time.Duration
	ending    string

	reqs  chan request
	halts chan chan error
	stop  context.CancelFunc
	done  chan struct{}
	token uint64 // last sync token; owner only

	mu   sync.Mutex
	link driver.LinkStatus
	desc driver.Description
	// identity is what the instrument answered to identify on the first connection.
	identity string
	failed   int // exchanges failed in a row
	retryAt  time.Time
}

var (
	_ driver.Instrument   = (*Driver)(nil)
	_ driver.Mover        = (*Driver)(nil)
	_ driver.MultiMover   = (*Driver)(nil)
	_ driver.Counter      = (*Driver)(nil)
	_ driver.Source       = (*Driver)(nil)
	_ driver.Interlock    = (*Driver)(nil)
	_ driver.StatusReader = (*Driver)(nil)
	_ driver.Watchdog     = (*Driver)(nil)
	_ driver.LinkReporter = (*Driver)(nil)
	_ driver.Describer    = (*Driver)(nil)
)

type request struct {
	ctx  context.Context
	fn   func(ctx context.Context, c *conn) error
	done chan error
}

func init() {
	driver.Register("serial", func(ctx context.Context, p driver.Params) (driver.Instrument, error) {
		var s Settings
		if err := p.Decode(&s); err != nil {
			return nil, fmt.Errorf("serial settings: %w", err)
		}
		prof := DefaultProfile()
		if s.Profile != "" {
			var err error
			if prof, err = LoadProfile(s.Profile); err != nil {
				return nil, err
			}
		}
		return Open(ctx, prof, s, OpenPort, p.Logger)
	})
}

// Open checks the settings, connects to the instrument (which must answer) and starts the owner goroutine.
// open opens the port, on start and on every reconnection; the driver closes what it opens.
func Open(ctx context.Context, prof *Profile, s Settings, open OpenFunc, log *slog.Logger) (*Driver, error) {
	if err := s.check(); err != nil {
		return nil, err
	}
	if log == nil {
		log = slog.New(slog.DiscardHandler)
	}
	d := &Driver{prof: prof, set: s, open: open, log: log, keepalive: prof.Keepalive, timeout: prof.Timeout,
		ending: prof.CommandEnding, reqs: make(chan request), halts: make(chan chan error), done: make(chan struct{}),
		desc: prof.desc}
	if s.Keepalive != 0 {
		d.keepalive = s.Keepalive
	}
	if d.keepalive == 0 {
		d.keepalive = defaultKeepalive
	}
	if s.ReadTimeout != 0 {
		d.timeout = s.ReadTimeout
	}
	if e, _ := s.lineEnding(); e != "" {
		d.ending = e
	}
	d.link = driver.LinkStatus{State: driver.LinkConnecting}
	c, err := d.connect(ctx, true)
	if err != nil {
		return nil, err
	}
	d.setLink(driver.LinkUp, "")
	runCtx, stop := context.WithCancel(context.Background())
	d.stop = stop
	go d.run(runCtx, c)
	return d, nil
}

// Close stops the owner goroutine and closes the port.
func (d *Driver) Close() error {
	d.stop()
	<-d.done
	return nil
}

// do runs fn on the owner goroutine with the live connection.
func (d *Driver) do(ctx context.Context, fn func(ctx context.Context, c *conn) error) error {
	r := request{ctx: ctx, fn: fn, done: make(chan error, 1)}
	select {
	case d.reqs <- r:
	case <-ctx.Done():
		return ctx.Err()
	case <-d.done:
		return errors.New("serial driver closed")
	}
	return <-r.done
}

// call runs one operation with its retries, on the owner goroutine. An idempotent operation whose reply timed
// out or came garbled is tried again; after Failures such exchanges in a row the link is down.
func (d *Driver) call(ctx context.Context, c *conn, op *Operation, vals values, wait time.Duration) ([]values, error) {
	tries := 1
	if op.idempotent {
		tries += *d.set.Retries
	}
	var last error
	for range tries {
		got, err := c.exchange(ctx, op, vals, wait)
		var f *failure
		if !errors.As(err, &f) {
			if err == nil || ctx.Err() == nil {
				d.noteSuccess()
			}
			return got, err
		}
		last = fmt.Errorf("%s: %w", op.Name, err)
		if d.noteFailure(f) {
			return nil, fmt.Errorf("%w: %v", driver.ErrLinkDown, last)
		}
		if !op.idempotent {
			return nil, fmt.Errorf("%w (not retried: %s is not idempotent)", last, op.Name)
		}
	}
	return nil, last
}

// noteSuccess resets the failure count.
func (d *Driver) noteSuccess() {
	d.mu.Lock()
	defer d.mu.Unlock()
	d.failed = 0
}

// noteFailure counts a failed exchange and reports whether the link is now down.
func (d *Driver) noteFailure(f *failure) bool {
	d.mu.Lock()
	defer d.mu.Unlock()
	d.link.Errors++
	if f.timeout {
		d.link.Timeouts++
	}
	d.failed++
	if f.port {
		d.failed = max(d.failed, d.set.Failures)
	}
	return d.failed >= d.set.Failures
}

// broken reports whether the link must be torn down after an exchange.
func (d *Driver) broken() bool {
	d.mu.Lock()
	defer d.mu.Unlock()
	return d.failed >= d.set.Failures
}

func (d *Driver) setLink(state driver.Link, reason string) {
	d.mu.Lock()
	defer d.mu.Unlock()
	d.link.State, d.link.Reason = state, reason
}

// LinkStatus reports the link: up, down (with the reason) or connecting, and its error counters.
func (d *Driver) LinkStatus() driver.LinkStatus {
	d.mu.Lock()
	defer d.mu.Unlock()
	return d.link
}

// Describe returns the profile's description of the instrument, refined by the instrument's own.
func (d *Driver) Describe() driver.Description {
	d.mu.Lock()
	defer d.mu.Unlock()
	desc := d.desc
	desc.Axes = append([]driver.AxisDescription(nil), d.desc.Axes...)
	desc.Channels = append([]string(nil), d.desc.Channels...)
	return desc
}
