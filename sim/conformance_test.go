package sim_test

import (
	"testing"
	"time"

	"goniod/driver"
	"goniod/driver/drivertest"
	"goniod/sim"
)

// TestConformance runs the driver conformance suite on the in-process simulator; driver/serial runs the same
// suite on the serial driver talking to the simulator on a pseudo-terminal.
func TestConformance(t *testing.T) {
	drivertest.Run(t, drivertest.Setup{
		Open: func(t *testing.T) driver.Instrument {
			in, err := sim.New(sim.Config{Seed: 1, Speed: 1000}, nil)
			if err != nil {
				t.Fatal(err)
			}
			return in
		},
		LongGate: time.Hour, // 3.6 s of wall time at speed 1000
	})
}
