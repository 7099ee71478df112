package engine

import (
	"context"
	"fmt"
	"math"
	"time"

	"goniod/daemon/instrument"
	"goniod/daemon/validate"
	goniodv1 "goniod/proto/goniod/v1"
)

// Move drives one axis by hand, with the same limits as scans; refused while a scan runs or is paused.
func (e *Engine) Move(ctx context.Context, axis string, deg float64) error {
	cfg := e.ctl.Config()
	var es validate.Errors
	if a, ok := cfg.CheckAxis(&es, "axis", axis); ok {
		cfg.CheckAngle(&es, "angle_deg", a, deg)
	}
	if err := es.Err(); err != nil {
		return err
	}
	return e.Manual(func() error {
		_, err := e.ctl.MoveTo(ctx, []instrument.Target{{Axis: axis, Deg: deg}})
		if err == nil {
			e.log.Info("axis moved by hand", "axis", axis, "deg", deg)
		}
		return err
	})
}

// SourceChange is a manual change of the tube; nil fields keep their value.
type SourceChange struct {
	KV, MA      *float64
	HighVoltage *bool
}

// SetSource changes the tube by hand within its rating. Switching high voltage off is always allowed, even
// during a scan (the scan then pauses); anything else is refused while a scan runs or is paused.
func (e *Engine) SetSource(ctx context.Context, ch SourceChange) error {
	cfg := e.ctl.Config()
	cur := e.ctl.State().Source
	kv, ma := cur.KV, cur.MA
	if ch.KV != nil {
		kv = *ch.KV
	}
	if ch.MA != nil {
		ma = *ch.MA
	}
	var es validate.Errors
	if ch.KV != nil || ch.MA != nil {
		cfg.CheckSource(&es, "source", kv, ma)
	}
	if err := es.Err(); err != nil {
		return err
	}
	if ch.KV == nil && ch.MA == nil && ch.HighVoltage != nil && !*ch.HighVoltage {
		e.log.Info("high voltage off by hand")
		return e.ctl.SetHighVoltage(ctx, false)
	}
	return e.Manual(func() error {
		if ch.KV != nil || ch.MA != nil {
			if err := e.ctl.SetSource(ctx, kv, ma); err != nil {
				return err
			}
			e.log.Info("source set by hand", "kv", kv, "ma", ma)
		}
		if ch.HighVoltage != nil {
			if err := e.ctl.SetHighVoltage(ctx, *ch.HighVoltage); err != nil {
				return err
			}
			e.log.Info("high voltage switched by hand", "on", *ch.HighVoltage)
		}
		return nil
	})
}

// CountOnce counts at the present position and returns the result as a point (index 0); refused while a scan
// runs or is paused.
func (e *Engine) CountOnce(ctx context.Context, dwell time.Duration) (*goniodv1.Point, error) {
	cfg := e.ctl.Config()
	if dwell <= 0 || dwell > cfg.MaxDwell || math.IsNaN(float64(dwell)) {
		return nil, &validate.FieldError{Field: "dwell", Reason: fmt.Sprintf("%v is outside the allowed range (0s, %v]", dwell, cfg.MaxDwell)}
	}
	var p *goniodv1.Point
	err := e.Manual(func() error {
		r := &pointRunner{e: e, cfg: &cfg}
		if err := r.hold(ctx); err != nil {
			return err
		}
		c, err := e.ctl.Count(ctx, dwell)
		if err != nil {
			return err
		}
		p = r.build(0, nil, nil, c)
		e.ctl.NoteRate(p.RateCps, p.CorrectedRateCps)
		return nil
	})
	return p, err
}
