package instrument

import (
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"fmt"
	"math"
	"time"

	"goniod/daemon/validate"
	"goniod/driver"
)

// Axis is one axis as the daemon enforces it.
type Axis struct {
	Name string `json:"name" yaml:"name"`
	// Soft limits of the read-back angle (zero offset applied), degrees.
	MinDeg float64 `json:"min_deg" yaml:"min_deg"`
	MaxDeg float64 `json:"max_deg" yaml:"max_deg"`
	// Smallest step, degrees.
	ResolutionDeg float64 `json:"resolution_deg" yaml:"resolution_deg"`
	// Zero offset: read-back angle = motor angle − offset.
	ZeroOffsetDeg float64 `json:"zero_offset_deg" yaml:"zero_offset_deg"`
	// Ratio to the lead axis in coupled scans; 0: not coupled.
	Coupling float64 `json:"coupling" yaml:"coupling"`
}

// Tube is the source rating.
type Tube struct {
	Anode     string  `json:"anode" yaml:"anode"`
	MaxKV     float64 `json:"max_kv" yaml:"max_kv"`
	MaxMA     float64 `json:"max_ma" yaml:"max_ma"`
	MaxPowerW float64 `json:"max_power_w" yaml:"max_power_w"`
}

// Config is the instrument as the daemon knows it: what the driver describes, overridden by the configuration
// file and by stored alignment.
type Config struct {
	Name                string        `json:"name"`
	Driver              string        `json:"driver"`
	Axes                []Axis        `json:"axes"`
	Tube                Tube          `json:"tube"`
	Crystal             string        `json:"crystal"`
	CrystalDNM          float64       `json:"crystal_d_nm"`
	DeadTime            time.Duration `json:"dead_time"`
	DeadTimeParalyzable bool          `json:"dead_time_paralyzable"`
	Channels            []string      `json:"channels"`
	// Largest number of points in one scan, and longest dwell of one point.
	MaxPoints int           `json:"max_points"`
	MaxDwell  time.Duration `json:"max_dwell"`
}

// MaxZeroOffsetDeg bounds an axis's zero offset: a larger one means a goniometer that needs mechanical
// adjustment, not a software correction.
const MaxZeroOffsetDeg = 10

// Defaults for what neither the driver nor the file sets.
const (
	DefaultMaxPoints = 1_000_000
	DefaultMaxDwell  = time.Hour
)

// FromDescription builds a config from what the driver says about itself.
func FromDescription(name, driverName string, d driver.Description) Config {
	c := Config{
		Name:                name,
		Driver:              driverName,
		Tube:                Tube{Anode: d.Anode, MaxKV: d.MaxKV, MaxMA: d.MaxMA, MaxPowerW: d.MaxPowerW},
		Crystal:             d.Crystal,
		CrystalDNM:          d.CrystalSpacingNM,
		DeadTime:            d.DeadTime,
		DeadTimeParalyzable: d.DeadTimeParalyzable,
		Channels:            append([]string(nil), d.Channels...),
		MaxPoints:           DefaultMaxPoints,
		MaxDwell:            DefaultMaxDwell,
	}
	for _, a := range d.Axes {
		c.Axes = append(c.Axes, Axis{Name: a.Name, MinDeg: a.MinDeg, MaxDeg: a.MaxDeg, ResolutionDeg: a.ResolutionDeg, Coupling: a.Coupling})
	}
	if len(c.Channels) == 0 {
		c.Channels = []string{"detector"}
	}
	return c
}

// Axis finds an axis by name.
func (c *Config) Axis(name string) (Axis, bool) {
	for _, a := range c.Axes {
		if a.Name == name {
			return a, true
		}
	}
	return Axis{}, false
}

// AxisNames lists the axes in configuration order.
func (c *Config) AxisNames() []string {
	out := make([]string, len(c.Axes))
	for i, a := range c.Axes {
		out[i] = a.Name
	}
	return out
}

// Coupled returns the coupled axes, the lead (the first with a coupling) first.
func (c *Config) Coupled() []Axis {
	var out []Axis
	for _, a := range c.Axes {
		if a.Coupling != 0 {
			out = append(out, a)
		}
	}
	return out
}

// CrystalAxis names the axis that turns the analyzer crystal: the coupled axis with ratio 1, else "theta" when
// there is one, else "".
func (c *Config) CrystalAxis() string {
	for _, a := range c.Axes {
		if a.Coupling == 1 {
			return a.Name
		}
	}
	if _, ok := c.Axis("theta"); ok {
		return "theta"
	}
	return ""
}

// CheckAxis adds an error when name is not an axis.
func (c *Config) CheckAxis(es *validate.Errors, field, name string) (Axis, bool) {
	a, ok := c.Axis(name)
	if !ok {
		es.Add(field, "unknown axis %q; axes are %v", name, c.AxisNames())
	}
	return a, ok
}

// CheckAngle adds an error when deg is outside the axis's soft limits.
func (c *Config) CheckAngle(es *validate.Errors, field string, a Axis, deg float64) bool {
	return es.Range(field, deg, a.MinDeg, a.MaxDeg, "°")
}

// CheckSource adds errors when a tube setting is beyond the rating.
func (c *Config) CheckSource(es *validate.Errors, field string, kv, ma float64) bool {
	ok := es.Range(field+".kv", kv, 0, c.Tube.MaxKV, " kV")
	ok = es.Range(field+".ma", ma, 0, c.Tube.MaxMA, " mA") && ok
	if ok && c.Tube.MaxPowerW > 0 && kv*ma > c.Tube.MaxPowerW {
		es.Add(field, "%g kV × %g mA = %g W is above the tube rating of %g W", kv, ma, kv*ma, c.Tube.MaxPowerW)
		ok = false
	}
	return ok
}

// Hash identifies this configuration in scan metadata: the first 12 hex digits of the SHA-256 of its JSON.
func (c *Config) Hash() string {
	b, err := json.Marshal(c)
	if err != nil {
		return "unhashable"
	}
	s := sha256.Sum256(b)
	return hex.EncodeToString(s[:6])
}

// Validate checks the configuration itself at start.
func (c *Config) Validate() error {
	var es validate.Errors
	if len(c.Axes) == 0 {
		es.Add("instrument.axes", "no axes configured")
	}
	seen := map[string]bool{}
	for i, a := range c.Axes {
		f := fmt.Sprintf("instrument.axes[%d]", i)
		if a.Name == "" {
			es.Add(f+".name", "empty")
		}
		if seen[a.Name] {
			es.Add(f+".name", "duplicate axis %q", a.Name)
		}
		seen[a.Name] = true
		es.Finite(f+".min_deg", a.MinDeg)
		es.Finite(f+".max_deg", a.MaxDeg)
		if a.MinDeg >= a.MaxDeg {
			es.Add(f, "min_deg %g must be below max_deg %g", a.MinDeg, a.MaxDeg)
		}
		if !(a.ResolutionDeg > 0 && a.ResolutionDeg < 10) {
			es.Add(f+".resolution_deg", "%g must be within (0, 10)", a.ResolutionDeg)
		}
		es.Range(f+".zero_offset_deg", a.ZeroOffsetDeg, -MaxZeroOffsetDeg, MaxZeroOffsetDeg, "°")
		es.Finite(f+".coupling", a.Coupling)
	}
	if c.Tube.MaxKV <= 0 || math.IsNaN(c.Tube.MaxKV) {
		es.Add("instrument.tube.max_kv", "%g must be > 0", c.Tube.MaxKV)
	}
	if c.Tube.MaxMA <= 0 || math.IsNaN(c.Tube.MaxMA) {
		es.Add("instrument.tube.max_ma", "%g must be > 0", c.Tube.MaxMA)
	}
	if c.MaxPoints < 1 {
		es.Add("limits.max_points", "%d must be >= 1", c.MaxPoints)
	}
	if c.MaxDwell <= 0 {
		es.Add("limits.max_dwell", "%v must be > 0", c.MaxDwell)
	}
	if c.DeadTime < 0 {
		es.Add("instrument.dead_time", "%v must be >= 0", c.DeadTime)
	}
	return es.Err()
}
