//go:build linux

package serial_test

import (
	"context"
	"testing"
	"time"

	"goniod/driver/drivertest"
	"goniod/driver/serial"
	"goniod/sim"
	"goniod/sim/scpi"
)

// recordSession runs session against the simulator on a pseudo-terminal and returns the recorded transcript.
func recordSession(t *testing.T, session func(*testing.T, *serial.Driver)) *drivertest.Transcript {
	dev := startDevice(t, sim.Config{}, scpi.Options{})
	var rec *drivertest.Recorder
	open := func(s serial.Settings) (serial.Port, error) {
		p, err := serial.OpenPort(s)
		if err != nil {
			return nil, err
		}
		rec = drivertest.NewRecorder(p, "session")
		return rec, nil
	}
	ctx, cancel := context.WithTimeout(context.Background(), 10*time.Second)
	defer cancel()
	drv, err := serial.Open(ctx, serial.DefaultProfile(), serial.Settings{Device: dev.link}, open, nil)
	if err != nil {
		t.Fatal(err)
	}
	session(t, drv)
	drv.Close()
	return rec.Transcript()
}
