package serial

import (
	"context"
	"errors"
	"fmt"
	"time"

	"goniod/driver"
)

// haltWait bounds how long Halt waits for the owner to send the halt command.
const haltWait = time.Second

// run is the owner goroutine: it serves requests, sends halts, feeds the instrument's watchdog while the
// link is up, and reconnects with backoff while it is down. c is nil while the link is down.
func (d *Driver) run(ctx context.Context, c *conn) {
	defer close(d.done)
	defer func() {
		if c != nil {
			c.port.Close()
		}
	}()
	wait := firstReconnectWait
	timer := time.NewTimer(d.keepalive)
	defer timer.Stop()
	for {
		select {
		case <-ctx.Done():
			return
		case r := <-d.reqs:
			if c == nil {
				c = d.reconnect(r.ctx, &wait)
			}
			if c == nil {
				r.done <- d.downError()
				break
			}
			err := r.fn(r.ctx, c)
			c = d.checkLink(c, err, wait)
			r.done <- err
		case h := <-d.halts:
			err := d.haltNow(c)
			if c != nil {
				c = d.checkLink(c, err, wait)
			}
			h <- err
		case <-timer.C:
			switch {
			case c == nil && !time.Now().Before(d.retryTime()):
				c = d.reconnect(ctx, &wait)
			case c != nil && time.Since(c.lastWrite) >= d.keepalive && d.prof.ops["keepalive"] != nil:
				_, err := d.call(ctx, c, d.prof.ops["keepalive"], nil, 0)
				c = d.checkLink(c, err, wait)
			}
		}
		timer.Reset(d.nextWake(c))
	}
}

// nextWake is how long the owner may sleep: until the next keepalive is due, or the next reconnection.
func (d *Driver) nextWake(c *conn) time.Duration {
	if c == nil {
		return max(time.Until(d.retryTime()), time.Millisecond)
	}
	return max(d.keepalive-time.Since(c.lastWrite), time.Millisecond)
}

func (d *Driver) retryTime() time.Time {
	d.mu.Lock()
	defer d.mu.Unlock()
	return d.retryAt
}

// checkLink tears the connection down when the last exchanges failed too often (or the port failed), and
// schedules the first reconnection.
func (d *Driver) checkLink(c *conn, err error, wait time.Duration) *conn {
	if !d.broken() {
		return c
	}
	c.port.Close()
	reason := "the instrument stopped answering"
	if err != nil {
		reason = err.Error()
	}
	d.mu.Lock()
	d.link.State, d.link.Reason = driver.LinkDown, reason
	d.retryAt = time.Now().Add(wait)
	d.mu.Unlock()
	d.log.Warn("instrument link down; reconnecting", "device", d.set.Device, "reason", reason)
	return nil
}

func (d *Driver) downError() error {
	s := d.LinkStatus()
	return fmt.Errorf("%w: serial device %s: %s", driver.ErrLinkDown, d.set.Device, s.Reason)
}

// reconnect tries once to connect. On failure it doubles the wait before the next try, up to ReconnectMax.
func (d *Driver) reconnect(ctx context.Context, wait *time.Duration) *conn {
	prev := d.LinkStatus()
	d.setLink(driver.LinkConnecting, prev.Reason)
	c, err := d.connect(ctx, false)
	d.mu.Lock()
	defer d.mu.Unlock()
	if err != nil {
		d.link.State, d.link.Reason = driver.LinkDown, err.Error()
		d.retryAt = time.Now().Add(*wait)
		*wait = min(*wait*2, d.set.ReconnectMax)
		d.log.Debug("reconnection failed", "device", d.set.Device, "err", err, "next_in", *wait)
		return nil
	}
	*wait = firstReconnectWait
	d.failed = 0
	d.link.State, d.link.Reason = driver.LinkUp, ""
	d.link.Reconnects++
	d.log.Info("instrument link up again; high voltage commanded off", "device", d.set.Device)
	return c
}

// connect opens the port and brings the instrument to a known state: in step with the host (a fresh sync
// token, or its identity), error queue cleared, high voltage off. Nothing switches high voltage on by itself,
// least of all a reconnection. The first connection also asks the instrument to describe itself.
func (d *Driver) connect(ctx context.Context, first bool) (*conn, error) {
	port, err := d.open(d.set)
	if err != nil {
		return nil, err
	}
	c := &conn{port: port, prof: d.prof, ending: []byte(d.ending), timeout: d.timeout, log: d.log,
		halts: d.halts, halt: d.haltOp(), token: &d.token, pos: map[string]float64{}, lastWrite: time.Now()}
	if err := d.handshake(ctx, c, first); err != nil {
		port.Close()
		return nil, fmt.Errorf("serial device %s: %w", d.set.Device, err)
	}
	return c, nil
}

func (d *Driver) handshake(ctx context.Context, c *conn, first bool) error {
	ops := d.prof.ops
	var identity []values
	if ops["sync"] != nil {
		c.needSync = true
		if err := c.resync(ctx); err != nil {
			return fmt.Errorf("the instrument does not answer: %w", err)
		}
	} else if r, err := c.exchange(ctx, ops["identify"], nil, 0); err != nil {
		return fmt.Errorf("the instrument does not answer: %w", err)
	} else {
		identity = r
	}
	for _, name := range []string{"clear", "high_voltage_off"} {
		if op := ops[name]; op != nil {
			if _, err := c.exchange(ctx, op, nil, 0); err != nil {
				return fmt.Errorf("%s: %w", name, err)
			}
		}
	}
	if identity == nil {
		r, err := c.exchange(ctx, ops["identify"], nil, 0)
		if err != nil {
			return fmt.Errorf("identify: %w", err)
		}
		identity = r
	}
	if err := d.sameInstrument(identity, first); err != nil {
		return err
	}
	if op := ops["describe"]; first && op != nil {
		r, err := c.exchange(ctx, op, nil, 0)
		if err != nil {
			return fmt.Errorf("describe: %w", err)
		}
		d.mu.Lock()
		d.desc = described(d.desc, r[0])
		d.mu.Unlock()
	}
	return nil
}

// sameInstrument remembers the identity the first connection found, and refuses a later connection to an
// instrument that answers with another: goniod's limits, offsets and description were made for the first one
// (a swapped adapter or cable may lead to the bench next door). The link stays down, saying so, until that
// instrument is back or goniod is restarted; high voltage has been commanded off on whichever answered.
func (d *Driver) sameInstrument(r []values, first bool) error {
	var id string
	if len(r) > 0 {
		id, _ = r[0]["text"].(string)
	}
	d.mu.Lock()
	defer d.mu.Unlock()
	if first || d.identity == "" {
		d.identity = id
		return nil
	}
	if id != d.identity {
		return fmt.Errorf("a different instrument answers (%q; goniod started with %q): its limits and description "+
			"would not apply; reconnect the first one, or restart goniod to use this one", id, d.identity)
	}
	return nil
}

// haltOp is the command that halts: the profile's halt, else its reset, else high voltage off.
func (d *Driver) haltOp() *Operation {
	for _, name := range []string{"halt", "reset", "high_voltage_off"} {
		if op := d.prof.ops[name]; op != nil {
			return op
		}
	}
	return nil
}

// haltNow halts the instrument from the idle owner.
func (d *Driver) haltNow(c *conn) error {
	if c == nil {
		return fmt.Errorf("halt: %w (high voltage is switched off when the link returns)", d.downError())
	}
	ctx, cancel := context.WithTimeout(context.Background(), haltWait)
	defer cancel()
	_, err := d.call(ctx, c, c.halt, nil, 0)
	return err
}

// Halt stops motion and counting and switches high voltage off, at any time: an exchange in progress is
// interrupted by the halt command (the instrument answers both). It does not wait longer than about a second.
func (d *Driver) Halt() error {
	h := make(chan error, 1)
	t := time.NewTimer(haltWait)
	defer t.Stop()
	select {
	case d.halts <- h:
	case <-d.done:
		return errors.New("halt: serial driver closed")
	case <-t.C:
		return errors.New("halt: the serial line's owner did not take the halt within 1s")
	}
	select {
	case err := <-h:
		return err
	case <-t.C:
		return errors.New("halt: sent, but not confirmed within 1s")
	}
}
