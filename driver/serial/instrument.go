package serial

import (
	"context"
	"fmt"
	"math"
	"strings"
	"time"

	"goniod/driver"
)

// described refines the profile's description with the instrument's describe reply.
func described(d driver.Description, r values) driver.Description {
	str := func(dst *string, key string) {
		if v, ok := r[key].(string); ok && v != "" {
			*dst = v
		}
	}
	num := func(dst *float64, key string) {
		if v, ok := r[key].(float64); ok && v > 0 {
			*dst = v
		}
	}
	str(&d.Model, "model")
	str(&d.Anode, "anode")
	str(&d.Crystal, "crystal")
	num(&d.CrystalSpacingNM, "d_nm")
	num(&d.MaxKV, "max_kv")
	num(&d.MaxMA, "max_ma")
	num(&d.MaxPowerW, "max_power_w")
	if v, ok := r["dead_time"].(float64); ok && v >= 0 && v < 0.01 {
		d.DeadTime = time.Duration(math.Round(v * 1e9))
	}
	if v, ok := r["paralyzable"].(bool); ok {
		d.DeadTimeParalyzable = v
	}
	return d
}

// Identify asks the instrument who it is.
func (d *Driver) Identify(ctx context.Context) (string, error) {
	var id string
	err := d.do(ctx, func(ctx context.Context, c *conn) error {
		r, err := d.call(ctx, c, d.prof.ops["identify"], nil, 0)
		if err == nil {
			id = r[0]["text"].(string)
		}
		return err
	})
	return id, err
}

// code is the instrument's name for an axis.
func (d *Driver) code(axis string) (string, error) {
	code, ok := d.prof.axisCodes[axis]
	if !ok {
		return "", fmt.Errorf("%w %q (the profile has %v)", driver.ErrUnknownAxis, axis, d.axisNames())
	}
	return code, nil
}

func (d *Driver) axisNames() []string {
	out := make([]string, 0, len(d.prof.desc.Axes))
	for _, a := range d.prof.desc.Axes {
		out = append(out, a.Name)
	}
	return out
}

// travel is how long the motion to target may take on top of the reply timeout: per_degree times the
// longest travel from the last known angles (the whole range when an angle is not known).
func (d *Driver) travel(c *conn, op *Operation, target map[string]float64) time.Duration {
	var longest float64
	for _, a := range d.prof.desc.Axes {
		deg, ok := target[a.Name]
		if !ok {
			continue
		}
		from, known := c.pos[a.Name]
		dist := a.MaxDeg - a.MinDeg
		if known {
			dist = math.Abs(deg - from)
		}
		longest = max(longest, math.Min(dist, a.MaxDeg-a.MinDeg))
	}
	return time.Duration(longest * float64(op.perDegree))
}

// Move drives one axis and returns the read-back angle.
func (d *Driver) Move(ctx context.Context, axis string, deg float64) (float64, error) {
	code, err := d.code(axis)
	if err != nil {
		return 0, err
	}
	var got float64
	err = d.do(ctx, func(ctx context.Context, c *conn) error {
		op := d.prof.ops["move"]
		r, err := d.call(ctx, c, op, values{"axis": code, "deg": deg}, d.travel(c, op, map[string]float64{axis: deg}))
		if err != nil {
			delete(c.pos, axis)
			return err
		}
		got = r[0]["deg"].(float64)
		c.pos[axis] = got
		return nil
	})
	return got, err
}

// MoveAll drives several axes together with the profile's move_all, else one after another.
func (d *Driver) MoveAll(ctx context.Context, target map[string]float64) (map[string]float64, error) {
	var order []string // the profile's axis order
	for _, a := range d.prof.desc.Axes {
		if _, ok := target[a.Name]; ok {
			order = append(order, a.Name)
		}
	}
	if len(order) != len(target) {
		for axis := range target {
			if _, err := d.code(axis); err != nil {
				return nil, err
			}
		}
	}
	op := d.prof.ops["move_all"]
	if op == nil {
		got := make(map[string]float64, len(order))
		for _, axis := range order {
			deg, err := d.Move(ctx, axis, target[axis])
			if err != nil {
				return nil, err
			}
			got[axis] = deg
		}
		return got, nil
	}
	got := make(map[string]float64, len(order))
	err := d.do(ctx, func(ctx context.Context, c *conn) error {
		items := make([]string, len(order))
		for i, axis := range order {
			items[i] = op.each.render(values{"axis": d.prof.axisCodes[axis], "deg": target[axis]})
		}
		r, err := d.call(ctx, c, op, values{"targets": strings.Join(items, op.join)}, d.travel(c, op, target))
		if err == nil && len(r) != len(order) {
			err = fmt.Errorf("move_all: %d read-back angles for %d axes", len(r), len(order))
		}
		for _, axis := range order {
			delete(c.pos, axis)
		}
		if err != nil {
			return err
		}
		for i, axis := range order {
			got[axis] = r[i]["deg"].(float64)
			c.pos[axis] = got[axis]
		}
		return nil
	})
	return got, err
}

// Position reads one axis's angle.
func (d *Driver) Position(ctx context.Context, axis string) (float64, error) {
	code, err := d.code(axis)
	if err != nil {
		return 0, err
	}
	var got float64
	err = d.do(ctx, func(ctx context.Context, c *conn) error {
		r, err := d.call(ctx, c, d.prof.ops["position"], values{"axis": code}, 0)
		if err == nil {
			got = r[0]["deg"].(float64)
			c.pos[axis] = got
		}
		return err
	})
	return got, err
}

// Count gates the counter; the reply may take the gate time on top of the timeout. A count whose reply
// timed out is not retried.
func (d *Driver) Count(ctx context.Context, gate time.Duration) (driver.Counts, error) {
	if gate < 0 {
		return driver.Counts{}, fmt.Errorf("%w: gate %v is negative", driver.ErrOutOfRange, gate)
	}
	var out driver.Counts
	err := d.do(ctx, func(ctx context.Context, c *conn) error {
		r, err := d.call(ctx, c, d.prof.ops["count"], values{"gate": gate.Seconds()}, gate)
		if err != nil {
			return err
		}
		out = driver.Counts{Gate: gate, Channels: make([]uint64, len(r))}
		for i, item := range r {
			out.Channels[i] = item["counts"].(uint64)
		}
		return nil
	})
	return out, err
}

// simple runs an operation without values.
func (d *Driver) simple(ctx context.Context, name string, vals values) ([]values, error) {
	var r []values
	err := d.do(ctx, func(ctx context.Context, c *conn) error {
		var err error
		r, err = d.call(ctx, c, d.prof.ops[name], vals, 0)
		return err
	})
	return r, err
}

// SetSource sets tube voltage and current.
func (d *Driver) SetSource(ctx context.Context, kv, ma float64) error {
	_, err := d.simple(ctx, "set_source", values{"kv": kv, "ma": ma})
	return err
}

// SetHighVoltage switches high voltage on or off.
func (d *Driver) SetHighVoltage(ctx context.Context, on bool) error {
	name := "high_voltage_off"
	if on {
		name = "high_voltage_on"
	}
	_, err := d.simple(ctx, name, nil)
	return err
}

// SourceState reads the tube's setting and high voltage.
func (d *Driver) SourceState(ctx context.Context) (driver.SourceState, error) {
	r, err := d.simple(ctx, "read_source", nil)
	if err != nil {
		return driver.SourceState{}, err
	}
	return driver.SourceState{KV: r[0]["kv"].(float64), MA: r[0]["ma"].(float64), HighVoltage: r[0]["high_voltage"].(bool)}, nil
}

// InterlockClosed reads the enclosure interlock.
func (d *Driver) InterlockClosed(ctx context.Context) (bool, error) {
	r, err := d.simple(ctx, "read_interlock", nil)
	if err != nil {
		return false, err
	}
	return r[0]["closed"].(bool), nil
}

// Status reads high voltage and interlock: in one exchange with the profile's read_status, else two.
func (d *Driver) Status(ctx context.Context) (driver.Status, error) {
	if d.prof.ops["read_status"] == nil {
		src, err := d.SourceState(ctx)
		if err != nil {
			return driver.Status{}, err
		}
		closed, err := d.InterlockClosed(ctx)
		return driver.Status{HighVoltage: src.HighVoltage, InterlockClosed: closed}, err
	}
	r, err := d.simple(ctx, "read_status", nil)
	if err != nil {
		return driver.Status{}, err
	}
	return driver.Status{HighVoltage: r[0]["high_voltage"].(bool), InterlockClosed: r[0]["interlock"].(bool)}, nil
}

// Feed sends the keepalive (nothing, when the profile has none). The owner also sends it by itself whenever
// the line has been idle for the keepalive period.
func (d *Driver) Feed(ctx context.Context) error {
	if d.prof.ops["keepalive"] == nil {
		return nil
	}
	_, err := d.simple(ctx, "keepalive", nil)
	return err
}

// WatchdogPeriod is the keepalive period.
func (d *Driver) WatchdogPeriod() time.Duration { return d.keepalive }
