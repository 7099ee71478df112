package serial

import (
	"errors"
	"fmt"
	"io"
	"io/fs"
	"time"

	goserial "go.bug.st/serial"
)

// Port is what the driver needs of a serial port. go.bug.st/serial's Port has it; tests use
// drivertest.Player and drivertest.Recorder.
type Port interface {
	io.ReadWriteCloser
	// SetReadTimeout bounds each Read; a Read that times out returns (0, nil).
	SetReadTimeout(d time.Duration) error
	// ResetInputBuffer throws away received bytes not yet read.
	ResetInputBuffer() error
}

// OpenFunc opens the port the settings name. The driver calls it on start and on every reconnection, and
// closes what it returns.
type OpenFunc func(s Settings) (Port, error)

// OpenPort opens a serial port with go.bug.st/serial, after taking an advisory lock on it so that a second
// daemon gets a clear "in use" (the library's exclusive mode does not stop root).
func OpenPort(s Settings) (Port, error) {
	unlock, err := lockPort(s.Device)
	if err != nil {
		return nil, portError(s.Device, err)
	}
	p, err := goserial.Open(s.Device, s.mode())
	if err != nil {
		unlock()
		return nil, portError(s.Device, err)
	}
	return &lockedPort{Port: p, unlock: unlock}, nil
}

// errPortInUse is returned (wrapped) when another process has the port.
var errPortInUse = errors.New("in use by another process")

// portError says plainly why a port did not open.
func portError(dev string, err error) error {
	var pe *goserial.PortError
	switch {
	case errors.Is(err, fs.ErrNotExist):
		return fmt.Errorf("serial device %s does not exist (unplugged, or a wrong path?)", dev)
	case errors.Is(err, errPortInUse):
		return fmt.Errorf("serial device %s: %w", dev, err)
	case errors.Is(err, fs.ErrPermission):
		return fmt.Errorf("serial device %s: permission denied (is the user in the group that owns it, e.g. dialout?)", dev)
	case errors.As(err, &pe) && pe.Code() == goserial.PortBusy:
		return fmt.Errorf("serial device %s: %w", dev, errPortInUse)
	case errors.As(err, &pe) && pe.Code() == goserial.PermissionDenied:
		return fmt.Errorf("serial device %s: permission denied (is the user in the group that owns it, e.g. dialout?)", dev)
	case errors.As(err, &pe) && pe.Code() == goserial.InvalidSerialPort:
		return fmt.Errorf("%s is not a usable serial port: %v", dev, err)
	}
	return fmt.Errorf("serial device %s: %w", dev, err)
}

// lockedPort releases its lock when closed.
type lockedPort struct {
	goserial.Port
	unlock func()
}

func (p *lockedPort) Close() error {
	err := p.Port.Close()
	p.unlock()
	return err
}
