// Package sim is goniod's simulated X-ray instrument: tube, analyzer crystal, two-axis goniometer, Geiger–Müller
// counter, interlock and watchdog. It serves as the in-process driver "sim" and behind the serial protocol.
package sim

import (
	"context"
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"sync"
	"time"

	"goniod/driver"
	"goniod/xray"
)

// Axis names of the simulated goniometer.
const (
	AxisTheta    = "theta"
	AxisTwoTheta = "twotheta"
)

// ErrHalted is returned (wrapped) by a move or count that Halt cut short.
var ErrHalted = errors.New("halted")

// Instrument is the simulated instrument. It is safe for concurrent use; Halt may be called at any time.
type Instrument struct {
	cfg     Config
	clock   Clock
	model   model
	anode   xray.Anode
	crystal xray.Crystal
	counter geiger

	mu       sync.Mutex
	gonio    goniometer
	tube     *tube
	door     bool      // true when open
	hostSeen time.Time // host time (see hostNow) of the host's last command
	busy     int       // host commands in progress: the host is not silent while one runs
	offWhy   string    // why high voltage last went off without being asked
	rng      *rand.Rand
	lastRate rateMemo        // the model's last answer: repeated counts at one place (timed scans) reuse it
	halt     context.Context // cancelled by Halt to abort moves and counts in progress
	haltNow  context.CancelFunc
}

var (
	_ driver.Instrument   = (*Instrument)(nil)
	_ driver.Mover        = (*Instrument)(nil)
	_ driver.MultiMover   = (*Instrument)(nil)
	_ driver.Counter      = (*Instrument)(nil)
	_ driver.Source       = (*Instrument)(nil)
	_ driver.Interlock    = (*Instrument)(nil)
	_ driver.Watchdog     = (*Instrument)(nil)
	_ driver.Describer    = (*Instrument)(nil)
	_ driver.Waiter       = (*Instrument)(nil)
	_ driver.StatusReader = (*Instrument)(nil)
)

// Tube setpoint at power-up; high voltage is off.
const (
	initialKV = 20.0
	initialMA = 0.5
)

// New builds a simulated instrument. A nil clock means a ScaledClock at cfg.Speed.
func New(cfg Config, clock Clock) (*Instrument, error) {
	cfg = cfg.withDefaults()
	if err := cfg.validate(); err != nil {
		return nil, err
	}
	anode, _ := xray.LookupAnode(cfg.Anode)
	crystal, _ := xray.LookupCrystal(cfg.Crystal)
	if clock == nil {
		clock = NewScaledClock(cfg.Speed)
	}
	deadModel := xray.NonParalyzable
	if cfg.Paralyzable {
		deadModel = xray.Paralyzable
	}
	slewKV, slewMA := math.Inf(1), math.Inf(1)
	if cfg.RampTime > 0 {
		slewKV, slewMA = cfg.MaxKV/cfg.RampTime.Seconds(), cfg.MaxMA/cfg.RampTime.Seconds()
	}
	now := clock.Now()
	in := &Instrument{
		cfg:     cfg,
		clock:   clock,
		anode:   anode,
		crystal: crystal,
		counter: geiger{tau: cfg.DeadTime.Seconds(), model: deadModel},
		model:   newModel(anode, crystal, specimenOf(crystal), cfg.MosaicFWHMDeg, cfg.DivergenceFWHMDeg, cfg.SlitDeg, cfg.BackgroundCPS, cfg.IntensityScale),
		gonio:   newGoniometer(cfg),
		tube:    newTube(now, initialKV, initialMA, slewKV, slewMA),
		rng:     rand.New(rand.NewPCG(uint64(cfg.Seed), 0x676f6e696f64)),
	}
	in.hostSeen = in.hostNow()
	in.halt, in.haltNow = context.WithCancel(context.Background())
	return in, nil
}

func init() {
	driver.Register("sim", func(_ context.Context, p driver.Params) (driver.Instrument, error) {
		var cfg Config
		if err := p.Decode(&cfg); err != nil {
			return nil, fmt.Errorf("sim settings: %w", err)
		}
		return New(cfg, nil)
	})
}

// Describe tells the daemon the simulated instrument's axes, tube and crystal.
func (in *Instrument) Describe() driver.Description {
	return driver.Description{
		Model:               "goniod simulated spectrometer",
		Axes:                in.gonio.describe(),
		Anode:               in.anode.Symbol,
		MaxKV:               in.cfg.MaxKV,
		MaxMA:               in.cfg.MaxMA,
		MaxPowerW:           in.cfg.MaxPowerW,
		Crystal:             in.crystal.Name,
		CrystalSpacingNM:    in.crystal.DNM,
		DeadTime:            in.cfg.DeadTime,
		DeadTimeParalyzable: in.cfg.Paralyzable,
		Channels:            []string{"detector"},
	}
}

// Identify returns the simulator's identity line: maker, model, serial (anode and crystal), firmware (seed).
func (in *Instrument) Identify(context.Context) (string, error) {
	in.touch()
	return fmt.Sprintf("goniod,simulated spectrometer,%s-%s,seed %d", in.anode.Symbol, in.crystal.Name, in.cfg.Seed), nil
}

// Halt switches high voltage off, stops both axes where they are and aborts any move or count in progress.
func (in *Instrument) Halt() error {
	in.mu.Lock()
	defer in.mu.Unlock()
	now := in.clock.Now()
	in.switchOffLocked(now, "halt")
	in.gonio.stop(now)
	in.haltNow()
	in.halt, in.haltNow = context.WithCancel(context.Background())
	return nil
}

// Close does nothing: the simulator holds no resources.
func (in *Instrument) Close() error { return nil }

// hostNow is the time by which the host's silence is measured: wall time for a ScaledClock (host silence is
// a property of the host, not of the simulated physics), the clock's own time for a ManualClock.
func (in *Instrument) hostNow() time.Time {
	if c, ok := in.clock.(interface{ hostNow() time.Time }); ok {
		return c.hostNow()
	}
	return time.Now()
}

// touch records a host command that completes at once.
func (in *Instrument) touch() {
	in.mu.Lock()
	defer in.mu.Unlock()
	in.applySafetyLocked(in.clock.Now())
	in.hostSeen = in.hostNow()
}

// begin records the start of a host command that takes time; the returned func records its end.
func (in *Instrument) begin() (end func()) {
	in.mu.Lock()
	defer in.mu.Unlock()
	in.applySafetyLocked(in.clock.Now())
	in.hostSeen = in.hostNow()
	in.busy++
	return func() {
		in.mu.Lock()
		defer in.mu.Unlock()
		in.busy--
		in.hostSeen = in.hostNow()
	}
}

// applySafetyLocked drops high voltage, at simulated time now, when the door is open or the host has been
// silent longer than the watchdog time. It runs before every host command and every State, so a trip is seen
// before anything that depends on the tube.
func (in *Instrument) applySafetyLocked(now time.Time) {
	if !in.tube.setpoint().on {
		return
	}
	if in.door {
		in.switchOffLocked(now, "interlock")
		return
	}
	if in.cfg.Watchdog > 0 && in.busy == 0 && in.hostNow().Sub(in.hostSeen) > in.cfg.Watchdog {
		in.switchOffLocked(now, "watchdog")
	}
}

// switchOffLocked switches high voltage off at t and notes why.
func (in *Instrument) switchOffLocked(t time.Time, why string) {
	sp := in.tube.setpoint()
	if !sp.on {
		return
	}
	in.tube.set(t, sp.kv, sp.ma, false)
	in.offWhy = why
}

// sleep waits simulated time, aborting when ctx ends or Halt is called.
func (in *Instrument) sleep(ctx context.Context, d time.Duration) error {
	in.mu.Lock()
	halt := in.halt
	in.mu.Unlock()
	ctx, cancel := context.WithCancel(ctx)
	defer cancel()
	stop := context.AfterFunc(halt, cancel)
	defer stop()
	if err := in.clock.Sleep(ctx, d); err != nil {
		if halt.Err() != nil {
			return ErrHalted
		}
		return err
	}
	if halt.Err() != nil {
		return ErrHalted
	}
	return nil
}

// Move drives one axis to a motor angle at the motors' finite speed and returns the read-back angle.
func (in *Instrument) Move(ctx context.Context, axis string, deg float64) (float64, error) {
	got, err := in.MoveAll(ctx, map[string]float64{axis: deg})
	if err != nil {
		return 0, err
	}
	return got[axis], nil
}

// MoveAll drives several axes together; the move takes as long as the longest one. Targets are rounded to
// the motor step. When ctx ends or Halt is called the axes stop where they are.
func (in *Instrument) MoveAll(ctx context.Context, target map[string]float64) (map[string]float64, error) {
	end := in.begin()
	defer end()
	in.mu.Lock()
	moves, longest, err := in.gonio.start(target, in.clock.Now())
	in.mu.Unlock()
	if err != nil {
		return nil, err
	}
	err = in.sleep(ctx, longest)
	in.mu.Lock()
	defer in.mu.Unlock()
	if err != nil {
		now := in.clock.Now()
		for name, m := range moves {
			if a := in.gonio.axes[name]; a.move == m {
				a.pos, a.move = in.gonio.at(a, now), nil
			}
		}
		return nil, fmt.Errorf("move: %w", err)
	}
	return in.gonio.finish(moves), nil
}

// Position reads one axis's motor angle (during a move, where the axis is now).
func (in *Instrument) Position(_ context.Context, axis string) (float64, error) {
	in.touch()
	in.mu.Lock()
	defer in.mu.Unlock()
	a, ok := in.gonio.axes[axis]
	if !ok {
		return 0, fmt.Errorf("%w %q", driver.ErrUnknownAxis, axis)
	}
	return in.gonio.at(a, in.clock.Now()), nil
}

// Wait lets d of simulated time pass.
func (in *Instrument) Wait(ctx context.Context, d time.Duration) error { return in.clock.Sleep(ctx, d) }
