//go:build !linux

package serial_test

import (
	"testing"

	"goniod/driver/drivertest"
	"goniod/driver/serial"
)

func recordSession(t *testing.T, _ func(*testing.T, *serial.Driver)) *drivertest.Transcript {
	t.Skip("recording needs a pseudo-terminal (Linux)")
	return nil
}
