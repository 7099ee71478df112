// Package sim is goniod's simulated X-ray instrument: tube, analyzer crystal, two-axis goniometer, Geiger–Müller
// counter, interlock and watchdog. It serves as the in-process driver "sim" and behind the serial protocol.
package sim

import (
	"context"
	"fmt"
	"math"
	"math/rand/v2"
	"sync"
	"time"

	"gonum.org/v1/gonum/stat/distuv"

	"goniod/driver"
	"goniod/xray"
)

// Axis names of the simulated goniometer.
const (
	AxisTheta    = "theta"
	AxisTwoTheta = "twotheta"
)

// Instrument is the simulated instrument. It is safe for concurrent use; Halt may be called at any time.
type Instrument struct {
	cfg     Config
	clock   Clock
	model   model
	crystal xray.Crystal

	mu       sync.Mutex
	motor    map[string]float64 // motor angles
	kv, ma   float64
	hv       bool
	door     bool // true when open
	lastHost time.Time
	rng      *rand.Rand
	halted   chan struct{} // closed and replaced by Halt to abort waits
}

var (
	_ driver.Instrument = (*Instrument)(nil)
	_ driver.Mover      = (*Instrument)(nil)
	_ driver.MultiMover = (*Instrument)(nil)
	_ driver.Counter    = (*Instrument)(nil)
	_ driver.Source     = (*Instrument)(nil)
	_ driver.Interlock  = (*Instrument)(nil)
	_ driver.Watchdog   = (*Instrument)(nil)
	_ driver.Describer  = (*Instrument)(nil)
	_ driver.Waiter     = (*Instrument)(nil)
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
	in := &Instrument{
		cfg:     cfg,
		clock:   clock,
		crystal: crystal,
		model: model{
			anode:   anode,
			dNM:     crystal.DNM,
			mosaicS: cfg.MosaicFWHMDeg / (2 * math.Sqrt(2*math.Ln2)),
			slit:    cfg.SlitDeg,
			bg:      cfg.BackgroundCPS,
		},
		motor:    map[string]float64{AxisTheta: 0, AxisTwoTheta: 0},
		kv:       20,
		ma:       0.5,
		lastHost: time.Now(),
		rng:      rand.New(rand.NewPCG(uint64(cfg.Seed), 0x676f6e696f64)),
		halted:   make(chan struct{}),
	}
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
		Model: "goniod simulated spectrometer",
		Axes: []driver.AxisDescription{
			{Name: AxisTheta, MinDeg: -10, MaxDeg: 100, ResolutionDeg: axisResolution, Coupling: 1},
			{Name: AxisTwoTheta, MinDeg: -10, MaxDeg: 170, ResolutionDeg: axisResolution, Coupling: 2},
		},
		Anode:               in.model.anode.Symbol,
		MaxKV:               maxKV,
		MaxMA:               maxMA,
		MaxPowerW:           maxPowerW,
		Crystal:             in.crystal.Name,
		CrystalSpacingNM:    in.crystal.DNM,
		DeadTime:            in.cfg.DeadTime,
		DeadTimeParalyzable: in.cfg.Paralyzable,
		Channels:            []string{"detector"},
	}
}

// Identify returns the simulator's identity line.
func (in *Instrument) Identify(context.Context) (string, error) {
	in.touch()
	return fmt.Sprintf("goniod,simulated spectrometer,%s-%s,seed %d", in.model.anode.Symbol, in.crystal.Name, in.cfg.Seed), nil
}

// Halt switches high voltage off and aborts any move or count in progress.
func (in *Instrument) Halt() error {
	in.mu.Lock()
	defer in.mu.Unlock()
	in.hv = false
	close(in.halted)
	in.halted = make(chan struct{})
	return nil
}

// Close does nothing: the simulator holds no resources.
func (in *Instrument) Close() error { return nil }

// touch records host activity for the watchdog and applies the watchdog and interlock.
func (in *Instrument) touch() {
	in.mu.Lock()
	defer in.mu.Unlock()
	in.applySafetyLocked()
	in.lastHost = time.Now()
}

// applySafetyLocked drops high voltage when the door is open or the host was silent too long. Host silence is
// measured in wall time: it is a property of the host, not of the simulated physics, and a fast simulation must
// not turn a 2 ms fsync into a 20 s silence.
func (in *Instrument) applySafetyLocked() {
	if in.door {
		in.hv = false
	}
	if in.cfg.Watchdog > 0 && time.Since(in.lastHost) > in.cfg.Watchdog {
		in.hv = false
	}
}

// sleep waits simulated time, aborting when ctx ends or Halt is called.
func (in *Instrument) sleep(ctx context.Context, d time.Duration) error {
	in.mu.Lock()
	halted := in.halted
	in.mu.Unlock()
	ctx, cancel := context.WithCancel(ctx)
	defer cancel()
	go func() {
		select {
		case <-halted:
			cancel()
		case <-ctx.Done():
		}
	}()
	if err := in.clock.Sleep(ctx, d); err != nil {
		select {
		case <-halted:
			return fmt.Errorf("halted")
		default:
		}
		return err
	}
	return nil
}

func (in *Instrument) limits(axis string) (lo, hi float64, err error) {
	for _, a := range in.Describe().Axes {
		if a.Name == axis {
			return a.MinDeg, a.MaxDeg, nil
		}
	}
	return 0, 0, fmt.Errorf("%w %q", driver.ErrUnknownAxis, axis)
}

// Move drives one axis to a motor angle at the motors' finite speed.
func (in *Instrument) Move(ctx context.Context, axis string, deg float64) (float64, error) {
	got, err := in.MoveAll(ctx, map[string]float64{axis: deg})
	if err != nil {
		return 0, err
	}
	return got[axis], nil
}

// MoveAll drives several axes together; the move takes as long as the longest one.
func (in *Instrument) MoveAll(ctx context.Context, target map[string]float64) (map[string]float64, error) {
	in.touch()
	var longest float64
	in.mu.Lock()
	for axis, deg := range target {
		lo, hi, err := in.limits(axis)
		if err != nil {
			in.mu.Unlock()
			return nil, err
		}
		if math.IsNaN(deg) || deg < lo || deg > hi {
			in.mu.Unlock()
			return nil, fmt.Errorf("%w: %s %.4f° outside [%g°, %g°]", driver.ErrOutOfRange, axis, deg, lo, hi)
		}
		longest = math.Max(longest, math.Abs(deg-in.motor[axis]))
	}
	in.mu.Unlock()
	if err := in.sleep(ctx, time.Duration(longest/axisSpeedDegPerS*float64(time.Second))); err != nil {
		return nil, fmt.Errorf("move: %w", err)
	}
	in.mu.Lock()
	defer in.mu.Unlock()
	got := make(map[string]float64, len(target))
	for axis, deg := range target {
		steps := math.Round(deg / axisResolution)
		in.motor[axis] = steps * axisResolution
		got[axis] = in.motor[axis]
	}
	return got, nil
}

// Position reads one axis's motor angle.
func (in *Instrument) Position(_ context.Context, axis string) (float64, error) {
	in.touch()
	in.mu.Lock()
	defer in.mu.Unlock()
	v, ok := in.motor[axis]
	if !ok {
		return 0, fmt.Errorf("%w %q", driver.ErrUnknownAxis, axis)
	}
	return v, nil
}

// SetSource sets tube voltage and current within the tube's rating.
func (in *Instrument) SetSource(_ context.Context, kv, ma float64) error {
	in.touch()
	if math.IsNaN(kv) || kv < 0 || kv > maxKV {
		return fmt.Errorf("%w: %g kV outside [0, %g]", driver.ErrOutOfRange, kv, maxKV)
	}
	if math.IsNaN(ma) || ma < 0 || ma > maxMA {
		return fmt.Errorf("%w: %g mA outside [0, %g]", driver.ErrOutOfRange, ma, maxMA)
	}
	if kv*ma > maxPowerW {
		return fmt.Errorf("%w: %g W above %g W", driver.ErrOutOfRange, kv*ma, maxPowerW)
	}
	in.mu.Lock()
	defer in.mu.Unlock()
	in.kv, in.ma = kv, ma
	return nil
}

// SetHighVoltage switches the tube on or off; on is refused while the door is open.
func (in *Instrument) SetHighVoltage(_ context.Context, on bool) error {
	in.touch()
	in.mu.Lock()
	defer in.mu.Unlock()
	if on && in.door {
		return driver.ErrInterlockOpen
	}
	in.hv = on
	return nil
}

// SourceState reports the tube.
func (in *Instrument) SourceState(context.Context) (driver.SourceState, error) {
	in.touch()
	in.mu.Lock()
	defer in.mu.Unlock()
	return driver.SourceState{KV: in.kv, MA: in.ma, HighVoltage: in.hv}, nil
}

// InterlockClosed reports the door.
func (in *Instrument) InterlockClosed(context.Context) (bool, error) {
	in.touch()
	in.mu.Lock()
	defer in.mu.Unlock()
	return !in.door, nil
}

// SetDoor opens or closes the enclosure door (fault injection); opening drops high voltage at once.
func (in *Instrument) SetDoor(open bool) {
	in.mu.Lock()
	defer in.mu.Unlock()
	in.door = open
	in.applySafetyLocked()
}

// Feed feeds the host watchdog.
func (in *Instrument) Feed(context.Context) error {
	in.touch()
	return nil
}

// WatchdogPeriod is a third of the watchdog time.
func (in *Instrument) WatchdogPeriod() time.Duration {
	if in.cfg.Watchdog <= 0 {
		return time.Minute
	}
	return in.cfg.Watchdog / 3
}

// Count gates the counter for gate (simulated time) and returns Poisson counts after dead-time losses.
func (in *Instrument) Count(ctx context.Context, gate time.Duration) (driver.Counts, error) {
	in.touch()
	if gate < 0 {
		return driver.Counts{}, fmt.Errorf("%w: gate %v", driver.ErrOutOfRange, gate)
	}
	if err := in.sleep(ctx, gate); err != nil {
		return driver.Counts{}, fmt.Errorf("count: %w", err)
	}
	in.mu.Lock()
	defer in.mu.Unlock()
	in.applySafetyLocked()
	theta := in.motor[AxisTheta] - in.cfg.ThetaOffsetDeg
	twoTheta := in.motor[AxisTwoTheta] - in.cfg.TwoThetaOffsetDeg
	trueRate := in.model.rate(theta, twoTheta, in.kv, in.ma, in.hv)
	t := gate.Seconds()
	n := in.poisson(trueRate * t)
	// Dead time: the recorded count for n true events in t seconds, by the configured model.
	var observed float64
	if t > 0 {
		model := xray.NonParalyzable
		if in.cfg.Paralyzable {
			model = xray.Paralyzable
		}
		observed = xray.ObservedRate(n/t, in.cfg.DeadTime.Seconds(), model) * t
	}
	return driver.Counts{Channels: []uint64{uint64(math.Round(observed))}, Gate: gate}, nil
}

// poisson draws a Poisson variate of the given mean from the instrument's seeded source.
func (in *Instrument) poisson(mean float64) float64 {
	if mean <= 0 {
		return 0
	}
	return distuv.Poisson{Lambda: mean, Src: in.rng}.Rand()
}

// Wait lets d of simulated time pass.
func (in *Instrument) Wait(ctx context.Context, d time.Duration) error { return in.clock.Sleep(ctx, d) }
