package config

import (
	"os"
	"strings"
	"testing"
	"time"

	"goniod/daemon/instrument"
)

func TestExampleConfigLoads(t *testing.T) {
	f, err := Load("../../testdata/goniod-sim.yaml")
	if err != nil {
		t.Fatal(err)
	}
	if f.Driver != "sim" || f.Limits.MaxDwell != 10*time.Minute || f.Instrument.Name != "bench-a" {
		t.Fatalf("loaded %+v", f)
	}
	var sim struct {
		Anode   string  `yaml:"anode"`
		Crystal string  `yaml:"crystal"`
		Seed    int64   `yaml:"seed"`
		Speed   float64 `yaml:"speed"`
	}
	if err := f.DriverDecoder("sim")(&sim); err != nil {
		t.Fatal(err)
	}
	if sim.Anode != "Cu" || sim.Seed != 7 || sim.Speed != 50 {
		t.Fatalf("sim section %+v", sim)
	}
}

func TestUnknownKeysAreRefusedWithTheirLine(t *testing.T) {
	_, err := Parse("x.yaml", []byte("listen: 127.0.0.1:1\nlimits:\n  max_point: 5\n"))
	if err == nil || !strings.Contains(err.Error(), "line 3") || !strings.Contains(err.Error(), "max_point") {
		t.Fatalf("got %v, want an error naming line 3 and max_point", err)
	}
	f, err := Parse("y.yaml", []byte("drivers:\n  sim:\n    sped: 5\n"))
	if err != nil {
		t.Fatal(err)
	}
	var sim struct {
		Speed float64 `yaml:"speed"`
	}
	if err := f.DriverDecoder("sim")(&sim); err == nil || !strings.Contains(err.Error(), "sped") {
		t.Fatalf("got %v, want an error naming sped", err)
	}
}

func TestFlagOverridesDriverField(t *testing.T) {
	f, err := Parse("z.yaml", []byte("drivers:\n  sim:\n    seed: 3\n    speed: 2\n"))
	if err != nil {
		t.Fatal(err)
	}
	if err := f.SetDriverField("sim", "seed", int64(9)); err != nil {
		t.Fatal(err)
	}
	var sim struct {
		Seed  int64   `yaml:"seed"`
		Speed float64 `yaml:"speed"`
	}
	if err := f.DriverDecoder("sim")(&sim); err != nil || sim.Seed != 9 || sim.Speed != 2 {
		t.Fatalf("got %+v, %v", sim, err)
	}
}

func TestApplyOverridesAndValidates(t *testing.T) {
	base := instrument.Config{Axes: []instrument.Axis{{Name: "theta", MinDeg: -10, MaxDeg: 100, ResolutionDeg: 0.001, Coupling: 1}},
		Tube: instrument.Tube{MaxKV: 35, MaxMA: 1}, MaxPoints: 10, MaxDwell: time.Hour}
	f, err := Parse("a.yaml", []byte("instrument:\n  zero_offsets: {theta: 0.25}\nlimits: {max_points: 500}\n"))
	if err != nil {
		t.Fatal(err)
	}
	c := base
	c.Axes = append([]instrument.Axis(nil), base.Axes...)
	if err := f.Apply(&c); err != nil {
		t.Fatal(err)
	}
	if c.Axes[0].ZeroOffsetDeg != 0.25 || c.MaxPoints != 500 {
		t.Fatalf("applied %+v", c)
	}
	f, _ = Parse("b.yaml", []byte("instrument:\n  zero_offsets: {phi: 1}\n"))
	if err := f.Apply(&c); err == nil || !strings.Contains(err.Error(), "phi") {
		t.Fatalf("got %v, want an error naming phi", err)
	}
	f, _ = Parse("c.yaml", []byte("instrument:\n  tube: {anode: Cu, max_kv: -1, max_ma: 1}\n"))
	if err := f.Apply(&c); err == nil || !strings.Contains(err.Error(), "max_kv") {
		t.Fatalf("got %v, want an error naming max_kv", err)
	}
}

// FuzzParse: any configuration text is read or refused with an error, never a crash; what is read applies
// to an instrument's configuration, again with an error or a configuration that validates.
func FuzzParse(f *testing.F) {
	for _, path := range []string{"../../testdata/goniod-sim.yaml", "../../cmd/goniod/deploy/goniod.yaml"} {
		b, err := os.ReadFile(path)
		if err != nil {
			f.Fatal(err)
		}
		f.Add(b)
	}
	f.Add([]byte("limits:\n  max_queued: -1\n  max_dwell: 1ns\ninstrument:\n  zero_offsets: {theta: .nan}\n"))
	f.Add([]byte("instrument:\n  axes:\n    - {name: theta, min_deg: 90, max_deg: -90, resolution_deg: 0}\n"))
	f.Fuzz(func(t *testing.T, b []byte) {
		file, err := Parse("fuzz.yaml", b)
		if err != nil {
			return
		}
		c := instrument.Config{Axes: []instrument.Axis{{Name: "theta", MinDeg: -10, MaxDeg: 100, ResolutionDeg: 0.001, Coupling: 1}},
			Tube: instrument.Tube{Anode: "Cu", MaxKV: 35, MaxMA: 1, MaxPowerW: 30}, MaxPoints: 1000, MaxDwell: time.Hour}
		if err := file.Apply(&c); err != nil {
			return
		}
		if err := c.Validate(); err != nil {
			t.Fatalf("applied a configuration that does not validate: %v", err)
		}
	})
}
