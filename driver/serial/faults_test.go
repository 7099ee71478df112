//go:build linux

package serial_test

import (
	"context"
	"errors"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"goniod/driver"
	"goniod/driver/serial"
	"goniod/sim"
	"goniod/sim/scpi"
)

func ctxFor(t *testing.T, d time.Duration) context.Context {
	ctx, cancel := context.WithTimeout(context.Background(), d)
	t.Cleanup(cancel)
	return ctx
}

// at moves both axes and returns the driver, ready for a point.
func at(t *testing.T, drv *serial.Driver, theta, twoTheta float64) {
	t.Helper()
	if _, err := drv.MoveAll(ctxFor(t, 5*time.Second), map[string]float64{"theta": theta, "twotheta": twoTheta}); err != nil {
		t.Fatal(err)
	}
}

// TestGarbledReplyRetried: a garbled reply to an idempotent operation is retried and the call succeeds.
func TestGarbledReplyRetried(t *testing.T) {
	t.Parallel()
	dev := startDevice(t, sim.Config{}, scpi.Options{Seed: 2})
	drv := openDriver(t, dev, nil)
	at(t, drv, 12, 24)
	dev.srv.Inject(scpi.Fault{Action: scpi.Garble})
	got, err := drv.Position(ctxFor(t, 5*time.Second), "theta")
	if err != nil || got != 12 {
		t.Fatalf("Position after a garbled reply = %v, %v; want 12 (retried)", got, err)
	}
	if s := drv.LinkStatus(); s.State != driver.LinkUp || s.Errors != 1 {
		t.Errorf("LinkStatus = %+v; want up with 1 error", s)
	}
}

// TestNoiseDuringCount: garbage on the line during a count spoils its reply; a count is not retried, the call
// fails without taking the link down, and the next exchange is back in step.
func TestNoiseDuringCount(t *testing.T) {
	t.Parallel()
	dev := startDevice(t, sim.Config{}, scpi.Options{Seed: 3})
	drv := openDriver(t, dev, nil)
	at(t, drv, 12, 24)
	dev.srv.Inject(scpi.Fault{Action: scpi.Noise, Bytes: 40, After: 50 * time.Millisecond})
	_, err := drv.Count(ctxFor(t, 5*time.Second), 200*time.Second) // 0.2 s of wall time
	if err == nil || errors.Is(err, driver.ErrLinkDown) || !strings.Contains(err.Error(), "not retried") {
		t.Fatalf("Count with noise on the line: err = %v; want a failure, not retried, link up", err)
	}
	if got, err := drv.Position(ctxFor(t, 5*time.Second), "twotheta"); err != nil || got != 24 {
		t.Errorf("Position after the spoilt count = %v, %v; want 24", got, err)
	}
	if s := drv.LinkStatus(); s.State != driver.LinkUp {
		t.Errorf("LinkStatus = %+v; want up", s)
	}
}

// TestStalledReply: a reply that comes too late times out; an idempotent call is retried once the line is
// back in step, a count is not.
func TestStalledReply(t *testing.T) {
	t.Parallel()
	dev := startDevice(t, sim.Config{}, scpi.Options{})
	drv := openDriver(t, dev, nil)
	at(t, drv, 12, 24)
	dev.srv.Inject(scpi.Fault{Action: scpi.Stall, For: 700 * time.Millisecond})
	if got, err := drv.Position(ctxFor(t, 10*time.Second), "theta"); err != nil || got != 12 {
		t.Fatalf("Position with a stalled reply = %v, %v; want 12 after retries", got, err)
	}
	s := drv.LinkStatus()
	if s.State != driver.LinkUp || s.Timeouts == 0 {
		t.Errorf("LinkStatus = %+v; want up, with timeouts counted", s)
	}
	dev.srv.Inject(scpi.Fault{Action: scpi.Stall, For: 700 * time.Millisecond})
	if _, err := drv.Count(ctxFor(t, 10*time.Second), 0); err == nil || !strings.Contains(err.Error(), "not retried") {
		t.Errorf("Count with a stalled reply: err = %v; want a timeout, not retried", err)
	}
	if _, err := drv.Count(ctxFor(t, 10*time.Second), 0); err != nil {
		t.Errorf("Count after the stall: %v", err)
	}
}

// TestLinkDownAndBack: an instrument that stops answering takes the link down after the allowed failures;
// when it answers again the driver reconnects by itself and switches high voltage off.
func TestLinkDownAndBack(t *testing.T) {
	t.Parallel()
	dev := startDevice(t, sim.Config{}, scpi.Options{})
	drv := openDriver(t, dev, func(s *serial.Settings) { s.Failures = 2 })
	ctx := ctxFor(t, 20*time.Second)
	if err := drv.SetHighVoltage(ctx, true); err != nil {
		t.Fatal(err)
	}
	dev.srv.Inject(scpi.Fault{Action: scpi.Stall, For: 1500 * time.Millisecond})
	_, err := drv.Position(ctx, "theta")
	if !errors.Is(err, driver.ErrLinkDown) {
		t.Fatalf("Position on a silent instrument: err = %v, want driver.ErrLinkDown", err)
	}
	if s := drv.LinkStatus(); s.State == driver.LinkUp || s.Reason == "" {
		t.Errorf("LinkStatus = %+v; want down with a reason", s)
	}
	waitUp(t, drv, 5*time.Second)
	if dev.inst.State().HighVoltage {
		t.Error("high voltage still on after the link came back; the driver must switch it off")
	}
	if s := drv.LinkStatus(); s.Reconnects != 1 {
		t.Errorf("LinkStatus = %+v; want 1 reconnection", s)
	}
}

func waitUp(t *testing.T, drv *serial.Driver, within time.Duration) {
	t.Helper()
	deadline := time.Now().Add(within)
	for drv.LinkStatus().State != driver.LinkUp {
		if time.Now().After(deadline) {
			t.Fatalf("link not up again within %v: %+v", within, drv.LinkStatus())
		}
		time.Sleep(20 * time.Millisecond)
	}
}

// TestDeviceVanishes: the device node goes away mid-count (a USB adapter pulled) and comes back at the same
// path: the count fails with ErrLinkDown at once, the driver reconnects, high voltage is off.
func TestDeviceVanishes(t *testing.T) {
	t.Parallel()
	dev := startDevice(t, sim.Config{}, scpi.Options{})
	drv := openDriver(t, dev, nil)
	ctx := ctxFor(t, 20*time.Second)
	if err := drv.SetHighVoltage(ctx, true); err != nil {
		t.Fatal(err)
	}
	dev.srv.Inject(scpi.Fault{Action: scpi.Drop, For: 400 * time.Millisecond, After: 100 * time.Millisecond})
	start := time.Now()
	_, err := drv.Count(ctx, time.Hour)
	if !errors.Is(err, driver.ErrLinkDown) || time.Since(start) > time.Second {
		t.Fatalf("Count when the device vanished: err = %v after %v; want driver.ErrLinkDown at once", err, time.Since(start))
	}
	if _, err := drv.Position(ctx, "theta"); !errors.Is(err, driver.ErrLinkDown) {
		t.Errorf("Position while the device is gone: err = %v, want driver.ErrLinkDown", err)
	}
	if err := drv.Halt(); err == nil {
		t.Error("Halt while the device is gone returned nil; it cannot have switched anything off")
	}
	waitUp(t, drv, 5*time.Second)
	if dev.inst.State().HighVoltage {
		t.Error("high voltage on after the device came back")
	}
	if _, err := drv.Position(ctx, "theta"); err != nil {
		t.Errorf("Position after the device came back: %v", err)
	}
}

// TestSwappedInstrumentRefused: the device goes away and another instrument answers at the same path (an
// adapter moved to the next bench): the link stays down naming both identities, with high voltage commanded off
// on the one that answered; when the first instrument is back, the link comes up again.
func TestSwappedInstrumentRefused(t *testing.T) {
	t.Parallel()
	link := filepath.Join(t.TempDir(), "tty")
	first, stop := serveAt(t, sim.Config{}, scpi.Options{}, link)
	t.Cleanup(stop)
	drv := openDriver(t, first, nil)
	ctx := ctxFor(t, 20*time.Second)
	if _, err := drv.Position(ctx, "theta"); err != nil {
		t.Fatal(err)
	}
	stop()
	other, stopOther := serveAt(t, sim.Config{Anode: "Mo"}, scpi.Options{}, link)
	t.Cleanup(stopOther)
	if err := other.inst.SetHighVoltage(ctx, true); err != nil {
		t.Fatal(err)
	}
	deadline := time.Now().Add(10 * time.Second)
	for {
		_, err := drv.Position(ctx, "theta")
		s := drv.LinkStatus()
		if strings.Contains(s.Reason, "different instrument") {
			if !errors.Is(err, driver.ErrLinkDown) && err != nil || s.State == driver.LinkUp {
				t.Fatalf("link %+v, Position error %v; want the link down", s, err)
			}
			if !strings.Contains(s.Reason, "Mo-LiF") || !strings.Contains(s.Reason, "Cu-LiF") {
				t.Errorf("reason %q does not name both instruments", s.Reason)
			}
			break
		}
		if err == nil && s.State == driver.LinkUp && s.Reconnects > 0 {
			t.Fatalf("the driver took the other instrument: %+v", s)
		}
		if time.Now().After(deadline) {
			t.Fatalf("no refusal of the other instrument within 10 s: %+v (last error %v)", s, err)
		}
		time.Sleep(20 * time.Millisecond)
	}
	if other.inst.State().HighVoltage {
		t.Error("high voltage still on on the instrument that answered")
	}
	stopOther()
	back, stopBack := serveAt(t, sim.Config{}, scpi.Options{}, link)
	t.Cleanup(stopBack)
	waitUp(t, drv, 5*time.Second)
	if _, err := drv.Position(ctx, "theta"); err != nil || back.inst.State().HighVoltage {
		t.Errorf("after the first instrument came back: %v, high voltage %v", err, back.inst.State().HighVoltage)
	}
}

// TestKeepalive: the driver feeds the instrument's watchdog while connected, by itself; once it is closed the
// watchdog switches high voltage off.
func TestKeepalive(t *testing.T) {
	t.Parallel()
	dev := startDevice(t, sim.Config{Watchdog: 400 * time.Millisecond}, scpi.Options{})
	drv := openDriver(t, dev, func(s *serial.Settings) { s.Keepalive = 100 * time.Millisecond })
	if err := drv.SetHighVoltage(ctxFor(t, 5*time.Second), true); err != nil {
		t.Fatal(err)
	}
	time.Sleep(time.Second)
	if st := dev.inst.State(); !st.HighVoltage {
		t.Fatalf("high voltage went off (%s) while the driver was connected and idle", st.OffReason)
	}
	drv.Close()
	time.Sleep(time.Second)
	if st := dev.inst.State(); st.HighVoltage || st.OffReason != "watchdog" {
		t.Errorf("after the host went silent: high voltage %v (off: %q); want off by the watchdog", st.HighVoltage, st.OffReason)
	}
}

// TestOpenErrors: a wrong path, a port in use and an instrument that does not answer give clear errors.
func TestOpenErrors(t *testing.T) {
	t.Parallel()
	ctx := ctxFor(t, 20*time.Second)
	open := func(dev string) error {
		d, err := serial.Open(ctx, serial.DefaultProfile(), serial.Settings{Device: dev, ReadTimeout: 200 * time.Millisecond}, serial.OpenPort, nil)
		if err == nil {
			d.Close()
		}
		return err
	}
	if err := open("/dev/no-such-tty"); err == nil || !strings.Contains(err.Error(), "/dev/no-such-tty does not exist") {
		t.Errorf("unknown device: %v", err)
	}
	dev := startDevice(t, sim.Config{}, scpi.Options{})
	openDriver(t, dev, nil)
	if err := open(dev.link); err == nil || !strings.Contains(err.Error(), "in use") {
		t.Errorf("second driver on the same port: %v, want \"in use\"", err)
	}
	p, err := scpi.OpenPTY()
	if err != nil {
		t.Fatal(err)
	}
	defer p.Close()
	if err := open(p.Path); err == nil || !strings.Contains(err.Error(), "does not answer") {
		t.Errorf("silent device: %v, want \"does not answer\"", err)
	}
	if err := open(""); err == nil || !strings.Contains(err.Error(), "drivers.serial.device") {
		t.Errorf("no device: %v", err)
	}
}

// TestPortSettings: parity, stop bits, baud and a CR LF line ending go through go.bug.st/serial to the port.
func TestPortSettings(t *testing.T) {
	t.Parallel()
	dev := startDevice(t, sim.Config{}, scpi.Options{})
	drv := openDriver(t, dev, func(s *serial.Settings) {
		s.Baud, s.Parity, s.StopBits, s.DataBits, s.LineEnding = 9600, "even", 2, 8, "crlf"
	})
	if id, err := drv.Identify(ctxFor(t, 5*time.Second)); err != nil || !strings.HasPrefix(id, "goniod,") {
		t.Errorf("Identify with 9600 8E2 and CR LF = %q, %v", id, err)
	}
}
