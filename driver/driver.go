// Package driver defines what goniod needs from an instrument, as small capability interfaces, and the
// registry through which drivers are chosen by name. It imports nothing else of goniod.
//
// Every driver offers [Instrument]. The capabilities a scan needs ([Mover], [Counter], [Source]) are
// separate interfaces; an instrument offers what it has and the daemon discovers the rest by type
// assertion ([MultiMover], [Interlock], [Watchdog], [LinkReporter]).
//
// Angles at this interface are motor angles in degrees: zero offsets are the daemon's business. Durations are
// time.Duration. Every call that may block takes a context and must return when it ends.
package driver

import (
	"context"
	"errors"
	"time"
)

// Instrument is the part every driver has.
type Instrument interface {
	// Identify returns who the instrument says it is (manufacturer, model, serial, firmware in one line).
	Identify(ctx context.Context) (string, error)
	// Halt stops motion and counting, switches high voltage off and leaves the hardware inert and safe.
	// It must work at any time, also while another call is in progress, and must not block for long.
	Halt() error
	// Close releases what the driver opened itself (not a port it was given).
	Close() error
}

// Mover moves named axes.
type Mover interface {
	// Move drives one axis to a motor angle and returns once it has arrived, with the read-back angle.
	Move(ctx context.Context, axis string, deg float64) (float64, error)
	// Position reads one axis's motor angle.
	Position(ctx context.Context, axis string) (float64, error)
}

// MultiMover moves several axes together (optional); the daemon falls back to moving one after another.
type MultiMover interface {
	// MoveAll drives every named axis to its motor angle and returns the read-back angles.
	MoveAll(ctx context.Context, target map[string]float64) (map[string]float64, error)
}

// Counts is the result of one counting gate.
type Counts struct {
	// Counts per channel; Channels[0] is the primary detector.
	Channels []uint64
	// Gate time the instrument actually counted for.
	Gate time.Duration
}

// Counter counts for a gate time.
type Counter interface {
	// Count gates the counter for the given time and returns the counts. Dead time is not corrected.
	Count(ctx context.Context, gate time.Duration) (Counts, error)
}

// SourceState is the tube as the instrument reports it.
type SourceState struct {
	KV          float64
	MA          float64
	HighVoltage bool
}

// Source is an X-ray tube supply.
type Source interface {
	// SetSource sets tube voltage (kV) and current (mA); it does not switch high voltage on.
	SetSource(ctx context.Context, kv, ma float64) error
	// SetHighVoltage switches high voltage on or off. On may be refused by the instrument (interlock open):
	// that is ErrInterlockOpen.
	SetHighVoltage(ctx context.Context, on bool) error
	// SourceState reads the tube's present setting.
	SourceState(ctx context.Context) (SourceState, error)
}

// Interlock reports the enclosure interlock (optional).
type Interlock interface {
	// InterlockClosed reports whether the enclosure is closed, so that high voltage is allowed.
	InterlockClosed(ctx context.Context) (bool, error)
}

// Watchdog is an instrument that switches high voltage off when the host is silent (optional).
type Watchdog interface {
	// Feed tells the instrument the host is alive.
	Feed(ctx context.Context) error
	// WatchdogPeriod is how often Feed should be called.
	WatchdogPeriod() time.Duration
}

// Link is the state of the connection to the instrument.
type Link int

const (
	LinkUp Link = iota + 1
	LinkDown
	LinkConnecting
)

func (l Link) String() string {
	switch l {
	case LinkUp:
		return "up"
	case LinkDown:
		return "down"
	case LinkConnecting:
		return "connecting"
	}
	return "unknown"
}

// LinkStatus is a snapshot of a link.
type LinkStatus struct {
	State  Link
	Reason string
	// Counters since the driver was opened.
	Errors, Timeouts, Reconnects uint64
}

// LinkReporter is a driver with a connection that can fail (optional; in-process drivers are always up).
type LinkReporter interface {
	LinkStatus() LinkStatus
}

// Errors a driver returns (wrapped) so the daemon can tell faults apart.
var (
	// ErrLinkDown: the connection to the instrument is lost; the call did not take effect or its effect is
	// unknown. The daemon pauses and waits for the link.
	ErrLinkDown = errors.New("instrument link down")
	// ErrInterlockOpen: the enclosure is open, high voltage is (or went) off.
	ErrInterlockOpen = errors.New("interlock open")
	// ErrUnknownAxis: the driver has no axis of that name.
	ErrUnknownAxis = errors.New("unknown axis")
	// ErrOutOfRange: the instrument refused a value outside its own limits.
	ErrOutOfRange = errors.New("value out of the instrument's range")
	// ErrHighVoltageOff: counting with the tube off was asked of an instrument that refuses it.
	ErrHighVoltageOff = errors.New("high voltage off")
)

// Status is the safety-relevant state in one reading.
type Status struct {
	HighVoltage     bool
	InterlockClosed bool
}

// StatusReader reads high voltage and interlock together (optional); a serial driver can do it in one
// exchange. Without it the daemon asks Source and Interlock separately.
type StatusReader interface {
	Status(ctx context.Context) (Status, error)
}

// Waiter is an instrument with its own time (optional): the simulator, whose clock may run faster than the
// wall. Settling waits use it so they scale with the simulated time.
type Waiter interface {
	Wait(ctx context.Context, d time.Duration) error
}
