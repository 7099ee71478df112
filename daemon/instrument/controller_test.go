package instrument_test

import (
	"context"
	"log/slog"
	"math"
	"strings"
	"testing"

	"goniod/daemon/instrument"
	"goniod/daemon/validate"
	"goniod/sim"
)

func newController(t *testing.T) (*instrument.Controller, context.CancelFunc) {
	t.Helper()
	inst, err := sim.New(sim.Config{Speed: 10000}, nil)
	if err != nil {
		t.Fatal(err)
	}
	cfg := instrument.FromDescription("sim", "sim", inst.Describe())
	c, err := instrument.NewController(inst, cfg, slog.New(slog.DiscardHandler))
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithCancel(context.Background())
	go c.Run(ctx)
	return c, cancel
}

// New zero offsets change the read-back angles at once (read-back = motor − offset) and the configuration's
// hash; offsets of unknown axes or beyond the bound are refused and change nothing.
func TestSetZeroOffsets(t *testing.T) {
	c, stop := newController(t)
	defer stop()
	ctx := context.Background()
	got, err := c.MoveTo(ctx, []instrument.Target{{Axis: "theta", Deg: 20}})
	if err != nil || math.Abs(got["theta"]-20) > 1e-9 {
		t.Fatalf("move: %v %v", got, err)
	}
	before := c.Config()
	if err := c.SetZeroOffsets(map[string]float64{"theta": 0.3}); err != nil {
		t.Fatal(err)
	}
	if p := c.State().Positions["theta"]; math.Abs(p-19.7) > 1e-9 {
		t.Errorf("theta reads %g° after a 0.3° offset, want 19.7° (the motor did not move)", p)
	}
	after := c.Config()
	if a, _ := after.Axis("theta"); a.ZeroOffsetDeg != 0.3 || after.Hash() == before.Hash() {
		t.Errorf("offset %g, hash %s → %s", a.ZeroOffsetDeg, before.Hash(), after.Hash())
	}
	if a, _ := before.Axis("theta"); a.ZeroOffsetDeg != 0 {
		t.Errorf("a configuration taken before the change sees offset %g", a.ZeroOffsetDeg)
	}
	if err := c.Refresh(ctx); err != nil {
		t.Fatal(err)
	}
	if p := c.State().Positions["theta"]; math.Abs(p-19.7) > 1e-9 {
		t.Errorf("after a refresh theta reads %g°, want 19.7°", p)
	}
	for _, bad := range []map[string]float64{{"omega": 1}, {"theta": 12}, {"twotheta": math.NaN()}, {"theta": 0.1, "twotheta": -11}} {
		err := c.SetZeroOffsets(bad)
		if fields := validate.Fields(err); len(fields) == 0 || !strings.HasPrefix(fields[0].Field, "zero_offsets") {
			t.Errorf("offsets %v: %v, want a refusal naming zero_offsets", bad, err)
		}
		cfg := c.Config()
		if a, _ := cfg.Axis("theta"); a.ZeroOffsetDeg != 0.3 {
			t.Fatalf("a refused change set theta's offset to %g", a.ZeroOffsetDeg)
		}
	}
}
