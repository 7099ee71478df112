package sim

import (
	"context"
	"strings"
	"testing"
	"time"

	"go.yaml.in/yaml/v3"

	"goniod/driver"
)

func TestConfigErrorsNameTheField(t *testing.T) {
	for _, c := range []struct {
		cfg   Config
		field string
	}{
		{Config{Anode: "Zn"}, "anode"},
		{Config{Crystal: "quartz"}, "crystal"},
		{Config{Speed: -1}, "speed"},
		{Config{ThetaOffsetDeg: 6}, "theta_offset_deg"},
		{Config{TwoThetaOffsetDeg: -5.5}, "twotheta_offset_deg"},
		{Config{DeadTime: -time.Microsecond}, "dead_time"},
		{Config{MosaicFWHMDeg: 9}, "mosaic_fwhm_deg"},
		{Config{DivergenceFWHMDeg: -0.1}, "divergence_fwhm_deg"},
		{Config{SlitDeg: 20}, "slit_deg"},
		{Config{BackgroundCPS: 1e5}, "background_cps"},
		{Config{IntensityScale: -2}, "intensity_scale"},
		{Config{MaxKV: 100}, "max_kv"},
		{Config{MaxMA: -1}, "max_ma"},
		{Config{MaxPowerW: 1e6}, "max_power_w"},
		{Config{RampTime: time.Hour}, "ramp_time"},
		{Config{StepDeg: 1}, "step_deg"},
		{Config{AxisSpeedDegPerS: 1e6}, "axis_speed_deg_per_s"},
		{Config{Watchdog: time.Millisecond}, "watchdog"},
	} {
		_, err := New(c.cfg, NewManualClock(epoch))
		if err == nil || !strings.Contains(err.Error(), c.field) {
			t.Errorf("New(%+v) = %v, want an error naming %s", c.cfg, err, c.field)
		}
	}
}

func TestConfigDefaults(t *testing.T) {
	in, err := New(Config{}, NewManualClock(epoch))
	if err != nil {
		t.Fatal(err)
	}
	d := in.Describe()
	if d.Anode != "Cu" || d.Crystal != "LiF(200)" || d.MaxKV != 35 || d.MaxMA != 1 || d.MaxPowerW != 35 ||
		d.DeadTime != 100*time.Microsecond || d.DeadTimeParalyzable || len(d.Axes) != 2 || d.Axes[1].Coupling != 2 {
		t.Errorf("defaults: %+v", d)
	}
	// The crystal's typical mosaic is the default: graphite's is wider than LiF's.
	g, _ := New(Config{Crystal: "graphite"}, NewManualClock(epoch))
	if g.cfg.MosaicFWHMDeg <= in.cfg.MosaicFWHMDeg {
		t.Errorf("graphite mosaic %g°, LiF %g°", g.cfg.MosaicFWHMDeg, in.cfg.MosaicFWHMDeg)
	}
	if st, _ := in.SourceState(context.Background()); st.HighVoltage {
		t.Error("high voltage on at power-up")
	}
}

// decoder decodes YAML strictly, as the daemon's configuration does for a driver's section.
func decoder(text string) func(v any) error {
	return func(v any) error {
		dec := yaml.NewDecoder(strings.NewReader(text))
		dec.KnownFields(true)
		return dec.Decode(v)
	}
}

func TestOpenThroughRegistry(t *testing.T) {
	ctx := context.Background()
	inst, err := driver.Open(ctx, "sim", driver.Params{Decode: decoder(`
anode: mo
crystal: NaCl
seed: 5
speed: 1000
theta_offset_deg: 0.2
dead_time: 150us
paralyzable: true
watchdog: 5s
ramp_time: 500ms
`)})
	if err != nil {
		t.Fatal(err)
	}
	in := inst.(*Instrument)
	d := in.Describe()
	if d.Anode != "Mo" || d.Crystal != "NaCl(200)" || d.DeadTime != 150*time.Microsecond || !d.DeadTimeParalyzable {
		t.Errorf("opened from YAML: %+v", d)
	}
	if in.cfg.Watchdog != 5*time.Second || in.cfg.RampTime != 500*time.Millisecond || in.cfg.ThetaOffsetDeg != 0.2 {
		t.Errorf("config from YAML: %+v", in.cfg)
	}
	if _, err := driver.Open(ctx, "sim", driver.Params{Decode: decoder("anode: Cu\ncrystl: LiF\n")}); err == nil ||
		!strings.Contains(err.Error(), "crystl") {
		t.Errorf("misspelt key: %v, want an error naming it", err)
	}
	if _, err := driver.Open(ctx, "sim", driver.Params{Decode: decoder("slit_deg: 50\n")}); err == nil ||
		!strings.Contains(err.Error(), "slit_deg") {
		t.Errorf("slit out of range: %v, want an error naming slit_deg", err)
	}
}
