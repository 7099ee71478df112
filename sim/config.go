package sim

import (
	"fmt"
	"math"
	"time"

	"goniod/xray"
)

// Config describes the simulated instrument. The zero value of every field means its default.
type Config struct {
	// Anode element symbol (default Cu).
	Anode string `yaml:"anode"`
	// Analyzer crystal name (default LiF).
	Crystal string `yaml:"crystal"`
	// Seed of the random source; the same seed gives the same counts.
	Seed int64 `yaml:"seed"`
	// Simulated seconds per wall second (default 1).
	Speed float64 `yaml:"speed"`
	// Zero offsets of the axes in degrees: the motor reads this much more than the true angle.
	ThetaOffsetDeg    float64 `yaml:"theta_offset_deg"`
	TwoThetaOffsetDeg float64 `yaml:"twotheta_offset_deg"`
	// Counter dead time (default 100 µs) and model.
	DeadTime    time.Duration `yaml:"dead_time"`
	Paralyzable bool          `yaml:"paralyzable"`
	// Mosaic spread of the crystal, FWHM in degrees (default 0.08°).
	MosaicFWHMDeg float64 `yaml:"mosaic_fwhm_deg"`
	// Detector slit: full acceptance width in 2θ, degrees (default 0.4°).
	SlitDeg float64 `yaml:"slit_deg"`
	// Background rate of the counter, counts per second (default 0.3).
	BackgroundCPS float64 `yaml:"background_cps"`
	// Host watchdog: high voltage goes off when the host is silent this long (0: default 10 s; negative: off).
	Watchdog time.Duration `yaml:"watchdog"`
}

// Limits of the simulated tube and goniometer.
const (
	maxKV     = 35.0
	maxMA     = 1.0
	maxPowerW = 35.0
	// Axis speed of the motors, degrees per simulated second.
	axisSpeedDegPerS = 20.0
	axisResolution   = 0.001
)

func (c Config) withDefaults() Config {
	if c.Anode == "" {
		c.Anode = "Cu"
	}
	if c.Crystal == "" {
		c.Crystal = "LiF"
	}
	if c.Speed == 0 {
		c.Speed = 1
	}
	if c.DeadTime == 0 {
		c.DeadTime = 100 * time.Microsecond
	}
	if c.MosaicFWHMDeg == 0 {
		c.MosaicFWHMDeg = 0.08
	}
	if c.SlitDeg == 0 {
		c.SlitDeg = 0.4
	}
	if c.BackgroundCPS == 0 {
		c.BackgroundCPS = 0.3
	}
	if c.Watchdog == 0 {
		c.Watchdog = 10 * time.Second
	}
	return c
}

// validate returns an error naming the first bad field.
func (c Config) validate() error {
	if _, err := xray.LookupAnode(c.Anode); err != nil {
		return fmt.Errorf("sim anode: %w", err)
	}
	if _, err := xray.LookupCrystal(c.Crystal); err != nil {
		return fmt.Errorf("sim crystal: %w", err)
	}
	checks := []struct {
		name      string
		v, lo, hi float64
	}{
		{"speed", c.Speed, 1e-3, 1e7},
		{"theta_offset_deg", c.ThetaOffsetDeg, -5, 5},
		{"twotheta_offset_deg", c.TwoThetaOffsetDeg, -5, 5},
		{"dead_time (s)", c.DeadTime.Seconds(), 0, 0.01},
		{"mosaic_fwhm_deg", c.MosaicFWHMDeg, 0.001, 5},
		{"slit_deg", c.SlitDeg, 0.01, 10},
		{"background_cps", c.BackgroundCPS, 0, 1e4},
	}
	for _, k := range checks {
		if math.IsNaN(k.v) || k.v < k.lo || k.v > k.hi {
			return fmt.Errorf("sim %s = %v: must be within [%v, %v]", k.name, k.v, k.lo, k.hi)
		}
	}
	return nil
}
