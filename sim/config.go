package sim

import (
	"fmt"
	"math"
	"time"

	"goniod/xray"
)

// Config describes the simulated instrument. The zero value of every field means its default; the YAML names
// are the keys of the daemon's `drivers: {sim: {...}}` section.
type Config struct {
	// Anode element symbol, case-insensitive (default Cu): Cr, Fe, Co, Cu, Mo, Ag, W.
	Anode string `yaml:"anode"`
	// Analyzer crystal name, case-insensitive, with or without the reflection (default LiF).
	Crystal string `yaml:"crystal"`
	// Seed of the random source; the same seed and the same calls give the same counts.
	Seed int64 `yaml:"seed"`
	// Simulated seconds per wall second (default 1). Used when New is given no clock.
	Speed float64 `yaml:"speed"`
	// Zero offsets of the axes in degrees: the motor reads this much more than the true angle.
	ThetaOffsetDeg    float64 `yaml:"theta_offset_deg"`
	TwoThetaOffsetDeg float64 `yaml:"twotheta_offset_deg"`
	// Counter dead time (default 100 µs) and model (default non-paralyzable).
	DeadTime    time.Duration `yaml:"dead_time"`
	Paralyzable bool          `yaml:"paralyzable"`
	// Mosaic spread of the crystal, FWHM in degrees (default: the crystal's typical value, 0.08° for LiF).
	MosaicFWHMDeg float64 `yaml:"mosaic_fwhm_deg"`
	// Divergence of the collimated beam, FWHM in degrees (default 0.1°).
	DivergenceFWHMDeg float64 `yaml:"divergence_fwhm_deg"`
	// Detector slit: full acceptance width in 2θ, degrees (default 0.4°).
	SlitDeg float64 `yaml:"slit_deg"`
	// Background rate of the counter, counts per second (default 0.3; negative: none).
	BackgroundCPS float64 `yaml:"background_cps"`
	// Brightness of the unit relative to the calibrated one (default 1); raise it to drive the counter into
	// dead-time saturation.
	IntensityScale float64 `yaml:"intensity_scale"`
	// Host watchdog: high voltage goes off when the host is silent this long (default 10 s; negative: off). It is
	// host (wall) time: a fast simulation does not shorten it. The host counts as present while one of its
	// commands (a move, a count) runs.
	Watchdog time.Duration `yaml:"watchdog"`
	// Tube rating (defaults 35 kV, 1 mA, 35 W).
	MaxKV     float64 `yaml:"max_kv"`
	MaxMA     float64 `yaml:"max_ma"`
	MaxPowerW float64 `yaml:"max_power_w"`
	// Time the high voltage takes to ramp from zero to the full rating (default 1 s; negative: instant).
	RampTime time.Duration `yaml:"ramp_time"`
	// Motor step of both axes, degrees (default 0.001°).
	StepDeg float64 `yaml:"step_deg"`
	// Motor speed of both axes, degrees per second (default 10).
	AxisSpeedDegPerS float64 `yaml:"axis_speed_deg_per_s"`
}

// Axis limits of the simulated goniometer (motor angles, degrees).
const (
	thetaMinDeg, thetaMaxDeg       = -10, 100
	twoThetaMinDeg, twoThetaMaxDeg = -10, 170
)

func (c Config) withDefaults() Config {
	setString(&c.Anode, "Cu")
	setString(&c.Crystal, "LiF")
	setFloat(&c.Speed, 1)
	setFloat(&c.DivergenceFWHMDeg, 0.1)
	setFloat(&c.SlitDeg, 0.4)
	setFloat(&c.BackgroundCPS, 0.3)
	setFloat(&c.IntensityScale, 1)
	setFloat(&c.MaxKV, 35)
	setFloat(&c.MaxMA, 1)
	setFloat(&c.MaxPowerW, 35)
	setFloat(&c.StepDeg, 0.001)
	setFloat(&c.AxisSpeedDegPerS, 10)
	if c.MosaicFWHMDeg == 0 {
		if cr, err := xray.LookupCrystal(c.Crystal); err == nil {
			c.MosaicFWHMDeg = specimenOf(cr).mosaicFWHMDeg
		}
	}
	if c.DeadTime == 0 {
		c.DeadTime = 100 * time.Microsecond
	}
	if c.Watchdog == 0 {
		c.Watchdog = 10 * time.Second
	}
	if c.RampTime == 0 {
		c.RampTime = time.Second
	}
	if c.BackgroundCPS < 0 {
		c.BackgroundCPS = 0
	}
	return c
}

func setString(p *string, def string) {
	if *p == "" {
		*p = def
	}
}

func setFloat(p *float64, def float64) {
	if *p == 0 {
		*p = def
	}
}

// validate returns an error naming the first bad field and its allowed range.
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
		{"divergence_fwhm_deg", c.DivergenceFWHMDeg, 0.001, 5},
		{"slit_deg", c.SlitDeg, 0.01, 10},
		{"background_cps", c.BackgroundCPS, 0, 1e4},
		{"intensity_scale", c.IntensityScale, 1e-6, 1e3},
		{"max_kv", c.MaxKV, 1, 60},
		{"max_ma", c.MaxMA, 0.01, 100},
		{"max_power_w", c.MaxPowerW, 0.1, 3000},
		{"step_deg", c.StepDeg, 1e-5, 0.5},
		{"axis_speed_deg_per_s", c.AxisSpeedDegPerS, 0.01, 1000},
	}
	if c.RampTime > 10*time.Minute {
		return fmt.Errorf("sim ramp_time = %v: must be at most 10m0s (negative: instant)", c.RampTime)
	}
	if c.Watchdog > 0 && c.Watchdog < 100*time.Millisecond {
		return fmt.Errorf("sim watchdog = %v: must be at least 100ms (negative: off)", c.Watchdog)
	}
	for _, k := range checks {
		if math.IsNaN(k.v) || k.v < k.lo || k.v > k.hi {
			return fmt.Errorf("sim %s = %v: must be within [%v, %v]", k.name, k.v, k.lo, k.hi)
		}
	}
	return nil
}
