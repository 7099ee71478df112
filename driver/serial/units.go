package serial

import (
	"fmt"
	"math"
	"sort"
	"strconv"
	"strings"
)

// kind is what a template variable or reply group holds.
type kind int

const (
	kindAngle   kind = iota + 1 // degrees
	kindTime                    // seconds
	kindVoltage                 // kilovolts
	kindCurrent                 // milliamperes
	kindPower                   // watts
	kindLength                  // nanometres
	kindCount                   // a whole number of counts
	kindInt                     // an integer code
	kindBool                    // one of the profile's booleans
	kindText                    // any text
)

// symbols are the unit symbols a profile may use, by kind, with their size in goniod's unit of that kind
// (the first of each list).
var symbols = map[kind]map[string]float64{
	kindAngle:   {"deg": 1, "mdeg": 1e-3, "arcmin": 1.0 / 60, "arcsec": 1.0 / 3600, "rad": 180 / math.Pi, "mrad": 0.180 / math.Pi},
	kindTime:    {"s": 1, "ms": 1e-3, "us": 1e-6, "µs": 1e-6, "min": 60},
	kindVoltage: {"kV": 1, "V": 1e-3},
	kindCurrent: {"mA": 1, "uA": 1e-3, "µA": 1e-3, "A": 1e3},
	kindPower:   {"W": 1, "mW": 1e-3, "kW": 1e3},
	kindLength:  {"nm": 1, "pm": 1e-3, "A": 0.1, "Å": 0.1},
}

var kindNames = map[kind]string{kindAngle: "an angle", kindTime: "a time", kindVoltage: "a voltage",
	kindCurrent: "a current", kindPower: "a power", kindLength: "a length", kindCount: "counts",
	kindInt: "an integer", kindBool: "a boolean", kindText: "text"}

// unit is an instrument's unit for a quantity: its size in goniod's unit. An instrument value v means
// v*size in goniod's unit.
type unit struct{ size float64 }

var one = unit{size: 1}

// parseUnit reads "[factor ]symbol", e.g. "mdeg", "0.01 deg" (motor steps of 0.01°), "ms", "V", for a
// quantity of kind k.
func parseUnit(s string, k kind) (unit, error) {
	syms, ok := symbols[k]
	if !ok {
		return unit{}, fmt.Errorf("%s has no unit", kindNames[k])
	}
	factor := 1.0
	fields := strings.Fields(s)
	switch len(fields) {
	case 1:
	case 2:
		f, err := strconv.ParseFloat(fields[0], 64)
		if err != nil || !(f > 0) || math.IsInf(f, 0) {
			return unit{}, fmt.Errorf("unit %q: the factor must be a positive number", s)
		}
		factor = f
	default:
		return unit{}, fmt.Errorf("unit %q: want [factor ]symbol, e.g. \"0.01 deg\"", s)
	}
	size, ok := syms[fields[len(fields)-1]]
	if !ok {
		names := make([]string, 0, len(syms))
		for n := range syms {
			names = append(names, n)
		}
		sort.Strings(names)
		return unit{}, fmt.Errorf("unit %q is not %s unit (have %s)", s, kindNames[k], strings.Join(names, ", "))
	}
	return unit{size: factor * size}, nil
}

// toInstrument converts a value in goniod's unit to the instrument's.
func (u unit) toInstrument(v float64) float64 { return v / u.size }

// fromInstrument converts an instrument value to goniod's unit.
func (u unit) fromInstrument(v float64) float64 { return v * u.size }
