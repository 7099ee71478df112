package scpi

import (
	"fmt"
	"strconv"
	"strings"
	"time"
)

// Action is what an injected fault does.
type Action int

const (
	// Drop: the device vanishes (the pseudo-terminal closes, its link goes) and a new one appears after For,
	// as when a USB adapter is pulled and plugged back.
	Drop Action = iota + 1
	// Stall: the next reply is held back for For.
	Stall
	// Mute: the next reply is never sent.
	Mute
	// Garble: the next reply is replaced by random bytes (ending in LF).
	Garble
	// Noise: Bytes random bytes go on the line at once, unasked.
	Noise
	// DoorOpen and DoorClose open and close the enclosure; opening drops high voltage.
	DoorOpen
	DoorClose
	// Trip: the high-voltage supply trips off.
	Trip
)

var actionNames = map[Action]string{Drop: "drop", Stall: "stall", Mute: "mute", Garble: "garble", Noise: "noise",
	DoorOpen: "door=open", DoorClose: "door=closed", Trip: "trip"}

// Defaults of the faults' arguments.
const (
	defaultDropFor    = time.Second
	defaultStallFor   = 5 * time.Second
	defaultNoiseBytes = 16
	maxNoiseBytes     = 4096
	maxFaultWait      = 24 * time.Hour
)

// Fault is a fault to inject, now, after a delay, or when a given command arrives.
type Fault struct {
	Action Action
	// For is how long a Drop lasts or a Stall holds its reply.
	For time.Duration
	// Bytes is the length of a Noise burst.
	Bytes int
	// After delays the fault from the moment it is injected (zero: at once, unless AtCommand is set).
	After time.Duration
	// AtCommand applies the fault when the command with this number arrives (1 is the first command the
	// server received), before it executes: a Stall, Mute or Garble then hits that command's reply.
	AtCommand int
}

// ParseFault reads a fault: [@DELAY | #N] ACTION[=ARG], where ACTION is drop[=DURATION], stall[=DURATION],
// mute, garble, noise[=BYTES], door=open, door=closed or trip. Examples: "garble", "@2s drop=500ms",
// "#40 stall=3s".
func ParseFault(s string) (Fault, error) {
	var f Fault
	fields := strings.Fields(s)
	if len(fields) == 2 {
		when := fields[0]
		switch {
		case strings.HasPrefix(when, "@"):
			d, err := time.ParseDuration(when[1:])
			if err != nil || d < 0 || d > maxFaultWait {
				return f, fmt.Errorf("fault %q: delay %q: want a duration within [0, 24h], e.g. @2s", s, when)
			}
			f.After = d
		case strings.HasPrefix(when, "#"):
			n, err := strconv.Atoi(when[1:])
			if err != nil || n < 1 {
				return f, fmt.Errorf("fault %q: command number %q: want #1 or more", s, when)
			}
			f.AtCommand = n
		default:
			return f, fmt.Errorf("fault %q: %q: want @DELAY or #COMMAND before the action", s, when)
		}
		fields = fields[1:]
	}
	if len(fields) != 1 {
		return f, fmt.Errorf("fault %q: want [@DELAY | #N] ACTION[=ARG]", s)
	}
	name, arg, hasArg := strings.Cut(strings.ToLower(fields[0]), "=")
	var err error
	switch name {
	case "drop", "stall":
		f.Action, f.For = Drop, defaultDropFor
		if name == "stall" {
			f.Action, f.For = Stall, defaultStallFor
		}
		if hasArg {
			f.For, err = time.ParseDuration(arg)
			if err != nil || f.For < 0 || f.For > maxFaultWait {
				return f, fmt.Errorf("fault %q: %s takes a duration within [0, 24h], e.g. %s=2s", s, name, name)
			}
		}
	case "noise":
		f.Action, f.Bytes = Noise, defaultNoiseBytes
		if hasArg {
			f.Bytes, err = strconv.Atoi(arg)
			if err != nil || f.Bytes < 1 || f.Bytes > maxNoiseBytes {
				return f, fmt.Errorf("fault %q: noise takes a byte count within [1, %d]", s, maxNoiseBytes)
			}
		}
	case "door":
		switch {
		case arg == "open":
			f.Action = DoorOpen
		case arg == "closed" || arg == "close":
			f.Action = DoorClose
		default:
			return f, fmt.Errorf("fault %q: use door=open or door=closed", s)
		}
		hasArg = false
	case "mute", "garble", "trip":
		f.Action = map[string]Action{"mute": Mute, "garble": Garble, "trip": Trip}[name]
		if hasArg {
			return f, fmt.Errorf("fault %q: %s takes no argument", s, name)
		}
	default:
		return f, fmt.Errorf("fault %q: unknown action %q (drop, stall, mute, garble, noise, door, trip)", s, name)
	}
	return f, nil
}

// String writes the fault in the form ParseFault reads.
func (f Fault) String() string {
	var b strings.Builder
	switch {
	case f.AtCommand > 0:
		fmt.Fprintf(&b, "#%d ", f.AtCommand)
	case f.After > 0:
		fmt.Fprintf(&b, "@%v ", f.After)
	}
	b.WriteString(actionNames[f.Action])
	switch f.Action {
	case Drop, Stall:
		fmt.Fprintf(&b, "=%v", f.For)
	case Noise:
		fmt.Fprintf(&b, "=%d", f.Bytes)
	}
	return b.String()
}
