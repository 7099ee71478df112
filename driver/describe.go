package driver

import "time"

// AxisDescription is an axis as the instrument knows it.
type AxisDescription struct {
	Name string
	// Mechanical limits of the motor angle, degrees.
	MinDeg, MaxDeg float64
	// Smallest step, degrees.
	ResolutionDeg float64
	// Ratio to the lead axis in a coupled scan (0: not coupled). The common spectrometer has theta 1, twotheta 2.
	Coupling float64
}

// Description is what an instrument can say about itself. The daemon's configuration file overrides any of it.
type Description struct {
	Model string
	Axes  []AxisDescription
	// Tube rating.
	Anode                   string
	MaxKV, MaxMA, MaxPowerW float64
	// Analyzer crystal, when the instrument knows it.
	Crystal          string
	CrystalSpacingNM float64 // d-spacing in nm
	// Counter dead time.
	DeadTime            time.Duration
	DeadTimeParalyzable bool
	// Channel names; the first is the primary detector.
	Channels []string
}

// Describer is an instrument that describes itself (optional).
type Describer interface {
	Describe() Description
}
