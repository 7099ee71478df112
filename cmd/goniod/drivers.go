package main

// The drivers compiled into goniod. Each registers itself by name in its init function; the configuration's
// "driver" key (or --sim / --serial) picks one.
import (
	_ "goniod/driver/serial" // "serial": instruments on a serial line, protocol from a profile
	_ "goniod/sim"           // "sim": the simulated instrument, the default
)
