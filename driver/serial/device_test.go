//go:build linux

package serial_test

import (
	"context"
	"os"
	"path/filepath"
	"sync"
	"testing"
	"time"

	"goniod/driver"
	"goniod/driver/drivertest"
	"goniod/driver/serial"
	"goniod/sim"
	"goniod/sim/scpi"
)

// device is goniosim's server on a pseudo-terminal, in-process, reachable at link.
type device struct {
	inst *sim.Instrument
	srv  *scpi.Server
	link string
}

// startDevice serves a simulated instrument on a pseudo-terminal until the test ends.
func startDevice(t testing.TB, cfg sim.Config, o scpi.Options) *device {
	t.Helper()
	d, stop := serveAt(t, cfg, o, filepath.Join(t.TempDir(), "tty"))
	t.Cleanup(stop)
	return d
}

// serveAt serves a simulated instrument on a pseudo-terminal linked at link until stop is called (the link
// goes away, as the node of an unplugged adapter does).
func serveAt(t testing.TB, cfg sim.Config, o scpi.Options, link string) (d *device, stop func()) {
	t.Helper()
	if cfg.Seed == 0 {
		cfg.Seed = 1
	}
	if cfg.Speed == 0 {
		cfg.Speed = 1000
	}
	inst, err := sim.New(cfg, nil)
	if err != nil {
		t.Fatal(err)
	}
	d = &device{inst: inst, srv: scpi.NewServer(inst, o), link: link}
	ctx, cancel := context.WithCancel(context.Background())
	done := make(chan error, 1)
	go func() { done <- d.srv.ServePTY(ctx, scpi.PTYOptions{Link: d.link}) }()
	var once sync.Once
	stop = func() {
		once.Do(func() {
			cancel()
			d.srv.Close()
			if err := <-done; err != nil {
				t.Errorf("ServePTY: %v", err)
			}
		})
	}
	d.waitLink(t)
	return d, stop
}

func (d *device) waitLink(t testing.TB) {
	t.Helper()
	for range 300 {
		if _, err := os.Stat(d.link); err == nil {
			return
		}
		time.Sleep(10 * time.Millisecond)
	}
	t.Fatalf("no device at %s after 3 s", d.link)
}

// openDriver opens the serial driver on the device with the built-in profile; fast timeouts keep fault
// tests short.
func openDriver(t testing.TB, d *device, change func(*serial.Settings)) *serial.Driver {
	t.Helper()
	s := serial.Settings{Device: d.link, ReadTimeout: 300 * time.Millisecond, ReconnectMax: 200 * time.Millisecond}
	if change != nil {
		change(&s)
	}
	ctx, cancel := context.WithTimeout(context.Background(), 10*time.Second)
	defer cancel()
	drv, err := serial.Open(ctx, serial.DefaultProfile(), s, serial.OpenPort, testLog(t))
	if err != nil {
		t.Fatalf("open the serial driver on %s: %v", d.link, err)
	}
	t.Cleanup(func() { drv.Close() })
	return drv
}

// TestConformance runs the driver conformance suite on the serial driver talking to the simulator on a
// pseudo-terminal, through go.bug.st/serial; sim runs the same suite in-process.
func TestConformance(t *testing.T) {
	drivertest.Run(t, drivertest.Setup{
		Open: func(t *testing.T) driver.Instrument {
			return openDriver(t, startDevice(t, sim.Config{}, scpi.Options{}), nil)
		},
		LongGate: time.Hour, // 3.6 s of wall time at speed 1000
	})
}
