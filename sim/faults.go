package sim

import (
	"time"
)

// State is a snapshot of the simulated instrument, read without counting as host activity: for status
// replies of a protocol server and for tests.
type State struct {
	// Simulated time of the snapshot.
	Time time.Time
	// Motor angles (read-back, degrees) and whether each axis is moving.
	MotorDeg map[string]float64
	Moving   map[string]bool
	// Tube setpoint, high voltage, and the output the supply delivers now (lower while ramping).
	KV, MA             float64
	HighVoltage        bool
	OutputKV, OutputMA float64
	// DoorOpen is the enclosure interlock: true when open.
	DoorOpen bool
	// HostSilentFor is how long the host has been silent, in host time (zero while one of its commands runs).
	HostSilentFor time.Duration
	// OffReason says why high voltage last went off without being asked: "interlock", "watchdog", "halt",
	// "trip", or "" when it never did.
	OffReason string
}

// State returns a snapshot of the instrument. It applies the interlock and watchdog first, so a watchdog
// that ran out shows as high voltage off.
func (in *Instrument) State() State {
	in.mu.Lock()
	defer in.mu.Unlock()
	now := in.clock.Now()
	in.applySafetyLocked(now)
	sp := in.tube.setpoint()
	out := in.tube.stateAt(now)
	s := State{
		Time:        now,
		MotorDeg:    map[string]float64{},
		Moving:      map[string]bool{},
		KV:          sp.kv,
		MA:          sp.ma,
		HighVoltage: sp.on,
		OutputKV:    out.kv,
		OutputMA:    out.ma,
		DoorOpen:    in.door,
		OffReason:   in.offWhy,
	}
	for name, a := range in.gonio.axes {
		s.MotorDeg[name] = in.gonio.at(a, now)
		s.Moving[name] = a.move != nil && now.Sub(a.move.start) < a.move.dur
	}
	if in.busy == 0 {
		s.HostSilentFor = in.hostNow().Sub(in.hostSeen)
	}
	return s
}

// SetDoor opens or closes the enclosure door (fault injection); opening drops high voltage at once. It is not
// host activity.
func (in *Instrument) SetDoor(open bool) {
	in.mu.Lock()
	defer in.mu.Unlock()
	now := in.clock.Now()
	in.applySafetyLocked(now)
	in.door = open
	in.applySafetyLocked(now)
}

// TripHighVoltage makes the supply trip (fault injection, as after an arc): high voltage goes off at once and
// stays off until the host switches it on again. It is not host activity.
func (in *Instrument) TripHighVoltage() {
	in.mu.Lock()
	defer in.mu.Unlock()
	now := in.clock.Now()
	in.applySafetyLocked(now)
	in.switchOffLocked(now, "trip")
}
