// Package instrument is the daemon's side of the instrument: its effective configuration (axes, limits,
// tube rating, crystal, dead time) and the Controller, the one goroutine that talks to the driver, so that
// scans, manual moves and state polls never interleave on the instrument's line.
package instrument

import (
	"context"
	"errors"
	"fmt"
	"log/slog"
	"sync"
	"time"

	"goniod/daemon/validate"
	"goniod/driver"
)

// State is the cached instrument state, read without touching the instrument.
type State struct {
	Positions       map[string]float64 // read-back angles, zero offsets applied
	Source          driver.SourceState
	InterlockClosed bool
	Link            driver.LinkStatus
	// Rates of the latest count.
	RateCPS, CorrectedRateCPS float64
	Updated                   time.Time
}

// Controller serialises every driver call through one owner goroutine and caches the state.
type Controller struct {
	drv       driver.Instrument
	mover     driver.Mover
	counter   driver.Counter
	source    driver.Source
	multi     driver.MultiMover   // optional
	interlock driver.Interlock    // optional
	watchdog  driver.Watchdog     // optional
	link      driver.LinkReporter // optional
	status    driver.StatusReader // optional
	waiter    driver.Waiter       // optional
	log       *slog.Logger
	poll      time.Duration

	reqs chan request

	mu       sync.Mutex
	cfg      Config
	state    State
	identity string // the instrument's answer to the last successful Identify
}

type request struct {
	ctx  context.Context
	fn   func(ctx context.Context) error
	done chan error
}

// NewController checks that the driver offers what scans need and returns a controller; call Run to start it.
func NewController(drv driver.Instrument, cfg Config, log *slog.Logger) (*Controller, error) {
	c := &Controller{drv: drv, log: log, reqs: make(chan request), cfg: cfg, poll: time.Second}
	var ok bool
	if c.mover, ok = drv.(driver.Mover); !ok {
		return nil, errors.New("driver cannot move axes (no driver.Mover)")
	}
	if c.counter, ok = drv.(driver.Counter); !ok {
		return nil, errors.New("driver cannot count (no driver.Counter)")
	}
	if c.source, ok = drv.(driver.Source); !ok {
		return nil, errors.New("driver has no X-ray source (no driver.Source)")
	}
	c.multi, _ = drv.(driver.MultiMover)
	c.interlock, _ = drv.(driver.Interlock)
	c.watchdog, _ = drv.(driver.Watchdog)
	c.link, _ = drv.(driver.LinkReporter)
	c.status, _ = drv.(driver.StatusReader)
	c.waiter, _ = drv.(driver.Waiter)
	c.state.Positions = map[string]float64{}
	c.state.InterlockClosed = c.interlock == nil
	c.state.Link = driver.LinkStatus{State: driver.LinkUp}
	return c, nil
}

// Config returns the effective configuration.
func (c *Controller) Config() Config {
	c.mu.Lock()
	defer c.mu.Unlock()
	return c.cfg
}

// SetZeroOffsets replaces axes' zero offsets (after alignment). The cached positions keep their motor angles
// and change their read-back angles with the offsets. Offsets of unknown axes or beyond ±MaxZeroOffsetDeg are
// refused, and then nothing changes.
func (c *Controller) SetZeroOffsets(offsets map[string]float64) error {
	c.mu.Lock()
	defer c.mu.Unlock()
	var es validate.Errors
	for name, o := range offsets {
		if _, ok := c.cfg.CheckAxis(&es, "zero_offsets", name); ok {
			es.Range("zero_offsets."+name, o, -MaxZeroOffsetDeg, MaxZeroOffsetDeg, "°")
		}
	}
	if err := es.Err(); err != nil {
		return err
	}
	// The config is shared by value with earlier callers: give the axes a new backing array.
	c.cfg.Axes = append([]Axis(nil), c.cfg.Axes...)
	for i, a := range c.cfg.Axes {
		o, ok := offsets[a.Name]
		if !ok {
			continue
		}
		if p, ok := c.state.Positions[a.Name]; ok {
			c.state.Positions[a.Name] = p + a.ZeroOffsetDeg - o
		}
		c.cfg.Axes[i].ZeroOffsetDeg = o
	}
	return nil
}

// State returns the cached state.
func (c *Controller) State() State {
	c.mu.Lock()
	defer c.mu.Unlock()
	s := c.state
	s.Positions = make(map[string]float64, len(c.state.Positions))
	for k, v := range c.state.Positions {
		s.Positions[k] = v
	}
	if c.link != nil {
		s.Link = c.link.LinkStatus()
	}
	return s
}

// Run is the owner loop. It executes requests one at a time, refreshes the cached state when idle and feeds
// the instrument's watchdog. It returns when ctx ends.
func (c *Controller) Run(ctx context.Context) {
	poll := time.NewTicker(c.poll)
	defer poll.Stop()
	var feed <-chan time.Time
	if c.watchdog != nil {
		t := time.NewTicker(c.watchdog.WatchdogPeriod())
		defer t.Stop()
		feed = t.C
	}
	c.refresh(ctx)
	// last is when the instrument last served a request. While requests keep coming (a scan runs) they keep most
	// of the cache fresh and the instrument's watchdog fed, so the feed stays off the line and the full poll
	// runs only every tenth period.
	last, polled := time.Time{}, time.Now()
	busy := func(period time.Duration) bool { return time.Since(last) < period }
	for {
		select {
		case <-ctx.Done():
			return
		case r := <-c.reqs:
			r.done <- r.fn(r.ctx)
			last = time.Now()
		case <-poll.C:
			if !busy(c.poll) || time.Since(polled) >= 10*c.poll {
				c.refresh(ctx)
				polled = time.Now()
			}
		case <-feed:
			if busy(c.watchdog.WatchdogPeriod()) {
				continue
			}
			fctx, cancel := context.WithTimeout(ctx, 5*time.Second)
			if err := c.watchdog.Feed(fctx); err != nil {
				c.log.Warn("watchdog feed failed", "err", err)
			}
			cancel()
		}
	}
}

// do runs fn on the owner goroutine and waits for it.
func (c *Controller) do(ctx context.Context, fn func(ctx context.Context) error) error {
	r := request{ctx: ctx, fn: fn, done: make(chan error, 1)}
	select {
	case c.reqs <- r:
	case <-ctx.Done():
		return ctx.Err()
	}
	return <-r.done
}

// refresh reads positions, source and interlock into the cache; errors are logged, the cache keeps old values.
func (c *Controller) refresh(ctx context.Context) {
	ctx, cancel := context.WithTimeout(ctx, 5*time.Second)
	defer cancel()
	cfg := c.Config()
	pos := map[string]float64{}
	for _, a := range cfg.Axes {
		m, err := c.mover.Position(ctx, a.Name)
		if err != nil {
			c.log.Debug("state poll: position", "axis", a.Name, "err", err)
			return
		}
		pos[a.Name] = m - a.ZeroOffsetDeg
	}
	src, err := c.source.SourceState(ctx)
	if err != nil {
		c.log.Debug("state poll: source", "err", err)
		return
	}
	closed := true
	if c.interlock != nil {
		if closed, err = c.interlock.InterlockClosed(ctx); err != nil {
			c.log.Debug("state poll: interlock", "err", err)
			return
		}
	}
	c.mu.Lock()
	c.state.Positions = pos
	c.state.Source = src
	c.state.InterlockClosed = closed
	c.state.Updated = time.Now()
	c.mu.Unlock()
}

// Refresh updates the cached state now.
func (c *Controller) Refresh(ctx context.Context) error {
	return c.do(ctx, func(ctx context.Context) error { c.refresh(ctx); return nil })
}

// Target is one axis's desired read-back angle.
type Target struct {
	Axis string
	Deg  float64
}

// MoveTo drives axes to read-back angles (zero offsets applied) and returns the read-back angles.
func (c *Controller) MoveTo(ctx context.Context, targets []Target) (map[string]float64, error) {
	cfg := c.Config()
	motor := make(map[string]float64, len(targets))
	for _, t := range targets {
		a, ok := cfg.Axis(t.Axis)
		if !ok {
			return nil, fmt.Errorf("%w %q", driver.ErrUnknownAxis, t.Axis)
		}
		if t.Deg < a.MinDeg || t.Deg > a.MaxDeg {
			return nil, fmt.Errorf("%w: %s %g° outside [%g°, %g°]", driver.ErrOutOfRange, a.Name, t.Deg, a.MinDeg, a.MaxDeg)
		}
		motor[t.Axis] = t.Deg + a.ZeroOffsetDeg
	}
	var got map[string]float64
	err := c.do(ctx, func(ctx context.Context) error {
		var err error
		if c.multi != nil && len(motor) > 1 {
			got, err = c.multi.MoveAll(ctx, motor)
			return err
		}
		got = make(map[string]float64, len(motor))
		for _, t := range targets {
			if got[t.Axis], err = c.mover.Move(ctx, t.Axis, motor[t.Axis]); err != nil {
				return err
			}
		}
		return nil
	})
	if err != nil {
		return nil, fmt.Errorf("move: %w", err)
	}
	out := make(map[string]float64, len(got))
	c.mu.Lock()
	for name, m := range got {
		a, _ := cfg.Axis(name)
		out[name] = m - a.ZeroOffsetDeg
		c.state.Positions[name] = out[name]
	}
	c.mu.Unlock()
	return out, nil
}

// Count gates the counter.
func (c *Controller) Count(ctx context.Context, gate time.Duration) (driver.Counts, error) {
	var n driver.Counts
	err := c.do(ctx, func(ctx context.Context) error {
		var err error
		n, err = c.counter.Count(ctx, gate)
		return err
	})
	if err != nil {
		return n, fmt.Errorf("count: %w", err)
	}
	if len(n.Channels) == 0 {
		return n, errors.New("count: driver returned no channels")
	}
	return n, nil
}

// NoteRate records the latest count rates for the state.
func (c *Controller) NoteRate(raw, corrected float64) {
	c.mu.Lock()
	c.state.RateCPS, c.state.CorrectedRateCPS = raw, corrected
	c.mu.Unlock()
}

// SetSource sets tube voltage and current.
func (c *Controller) SetSource(ctx context.Context, kv, ma float64) error {
	err := c.do(ctx, func(ctx context.Context) error {
		if err := c.source.SetSource(ctx, kv, ma); err != nil {
			return err
		}
		return c.readSourceLocked(ctx)
	})
	if err != nil {
		return fmt.Errorf("set source: %w", err)
	}
	return nil
}

// SetHighVoltage switches high voltage. Switching on is refused when the interlock is open.
func (c *Controller) SetHighVoltage(ctx context.Context, on bool) error {
	err := c.do(ctx, func(ctx context.Context) error {
		if on && c.interlock != nil {
			closed, err := c.interlock.InterlockClosed(ctx)
			if err != nil {
				return err
			}
			if !closed {
				return driver.ErrInterlockOpen
			}
		}
		if err := c.source.SetHighVoltage(ctx, on); err != nil {
			return err
		}
		return c.readSourceLocked(ctx)
	})
	if err != nil {
		return fmt.Errorf("high voltage %s: %w", onOff(on), err)
	}
	if !on {
		c.log.Info("high voltage off")
	}
	return nil
}

func onOff(on bool) string {
	if on {
		return "on"
	}
	return "off"
}

// readSourceLocked refreshes the cached source; call on the owner goroutine.
func (c *Controller) readSourceLocked(ctx context.Context) error {
	src, err := c.source.SourceState(ctx)
	if err != nil {
		return err
	}
	c.mu.Lock()
	c.state.Source = src
	c.mu.Unlock()
	return nil
}

// Status reads high voltage and interlock now (one exchange when the driver can).
func (c *Controller) Status(ctx context.Context) (driver.Status, error) {
	var st driver.Status
	err := c.do(ctx, func(ctx context.Context) error {
		if c.status != nil {
			var err error
			st, err = c.status.Status(ctx)
			return err
		}
		src, err := c.source.SourceState(ctx)
		if err != nil {
			return err
		}
		st.HighVoltage = src.HighVoltage
		st.InterlockClosed = true
		if c.interlock != nil {
			st.InterlockClosed, err = c.interlock.InterlockClosed(ctx)
		}
		return err
	})
	if err != nil {
		return st, fmt.Errorf("status: %w", err)
	}
	c.mu.Lock()
	c.state.Source.HighVoltage = st.HighVoltage
	c.state.InterlockClosed = st.InterlockClosed
	c.mu.Unlock()
	return st, nil
}

// Identify asks the instrument who it is and remembers the answer (see Identity).
func (c *Controller) Identify(ctx context.Context) (string, error) {
	var id string
	err := c.do(ctx, func(ctx context.Context) error {
		var err error
		id, err = c.drv.Identify(ctx)
		return err
	})
	if err == nil {
		c.mu.Lock()
		c.identity = id
		c.mu.Unlock()
	}
	return id, err
}

// Identity is the instrument's answer to the last successful Identify ("" before one).
func (c *Controller) Identity() string {
	c.mu.Lock()
	defer c.mu.Unlock()
	return c.identity
}

// Halt stops the instrument and switches high voltage off at once, bypassing the queue of requests.
func (c *Controller) Halt() error {
	if err := c.drv.Halt(); err != nil {
		return fmt.Errorf("halt: %w", err)
	}
	c.mu.Lock()
	c.state.Source.HighVoltage = false
	c.mu.Unlock()
	return nil
}

// Wait lets d pass in the instrument's time (simulated time on the simulator), for settling after a source
// change. It does not hold the instrument: other requests run meanwhile.
func (c *Controller) Wait(ctx context.Context, d time.Duration) error {
	if c.waiter != nil {
		return c.waiter.Wait(ctx, d)
	}
	t := time.NewTimer(d)
	defer t.Stop()
	select {
	case <-ctx.Done():
		return ctx.Err()
	case <-t.C:
		return nil
	}
}
