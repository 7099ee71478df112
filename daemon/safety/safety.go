// Package safety carries out the daemon's side of the safety policy while it runs: it watches the cached
// instrument state for the interlock opening (logged, counted, high voltage off) and switches high voltage off
// when it has been on with nothing to do for the configured idle time. It never switches high voltage on.
package safety

import (
	"context"
	"log/slog"
	"sync"
	"time"

	"goniod/daemon/instrument"
	"goniod/daemon/scan"
)

// Safety events, as counted by the Recorder.
const (
	// EventInterlockOpened: the enclosure interlock went from closed to open.
	EventInterlockOpened = "interlock_opened"
	// EventHighVoltageOffInterlock: high voltage was seen on with the interlock open and switched off.
	EventHighVoltageOffInterlock = "high_voltage_off_interlock"
	// EventHighVoltageOffIdle: high voltage was switched off after the idle time.
	EventHighVoltageOffIdle = "high_voltage_off_idle"
)

// Events lists every event the monitor records.
var Events = []string{EventInterlockOpened, EventHighVoltageOffInterlock, EventHighVoltageOffIdle}

// Instrument is the part of the instrument controller the monitor uses: the cached state, and high voltage off.
type Instrument interface {
	State() instrument.State
	SetHighVoltage(ctx context.Context, on bool) error
}

// Scans tells the monitor whether the instrument has work: a running scan, or scans waiting in the queue.
type Scans interface {
	Running() (scan.Record, bool)
	QueueLength() int
}

// Recorder counts safety events (the metrics).
type Recorder interface {
	SafetyEvent(event string)
}

// Options configure a Monitor.
type Options struct {
	Instrument Instrument
	Scans      Scans
	Recorder   Recorder
	Log        *slog.Logger
	// IdleHighVoltageOff switches high voltage off after this long on with no scan running or queued and no
	// control call (0: never).
	IdleHighVoltageOff time.Duration
	// Every is how often the cached state is looked at (default 200 ms).
	Every time.Duration
	// Now is the clock (default time.Now).
	Now func() time.Time
}

// Monitor applies the run-time safety policy. Create with New, run with Run.
type Monitor struct {
	o Options

	mu         sync.Mutex
	lastActive time.Time
	// what the previous look saw
	seen, wasClosed bool
	lastScan        string // the scan running at the previous look: the one an opening interrupts
	// after a failed switch-off, the next try waits until then (the link may be down)
	retryAt time.Time
}

// retryOff is the wait after a failed switch-off.
const retryOff = 5 * time.Second

// New returns a monitor.
func New(o Options) *Monitor {
	if o.Every <= 0 {
		o.Every = 200 * time.Millisecond
	}
	if o.Now == nil {
		o.Now = time.Now
	}
	return &Monitor{o: o, lastActive: o.Now()}
}

// Touch notes operator activity (a control call): the idle time starts again.
func (m *Monitor) Touch() {
	m.mu.Lock()
	m.lastActive = m.o.Now()
	m.mu.Unlock()
}

// Run looks at the cached state until ctx ends.
func (m *Monitor) Run(ctx context.Context) {
	t := time.NewTicker(m.o.Every)
	defer t.Stop()
	for {
		m.Check(ctx)
		select {
		case <-ctx.Done():
			return
		case <-t.C:
		}
	}
}

// Check looks at the cached state once and acts on it.
func (m *Monitor) Check(ctx context.Context) {
	st := m.o.Instrument.State()
	rec, running := m.o.Scans.Running()
	m.mu.Lock()
	scanID := m.lastScan
	if running {
		scanID = rec.ID
	}
	m.lastScan = ""
	if running {
		m.lastScan = rec.ID
	}
	opened := m.seen && m.wasClosed && !st.InterlockClosed
	firstOpen := !m.seen && !st.InterlockClosed
	m.seen, m.wasClosed = true, st.InterlockClosed
	if running || m.o.Scans.QueueLength() > 0 || !st.Source.HighVoltage {
		m.lastActive = m.o.Now()
	}
	idleFor := m.o.Now().Sub(m.lastActive)
	m.mu.Unlock()
	log := m.o.Log
	if scanID != "" {
		log = log.With("scan", scanID)
	}

	switch {
	case opened:
		log.Warn("interlock opened", "high_voltage_on", st.Source.HighVoltage)
		m.o.Recorder.SafetyEvent(EventInterlockOpened)
	case firstOpen:
		log.Warn("interlock open at start; high voltage cannot be switched on until it closes")
	}
	if m.o.Now().Before(m.retry()) {
		return
	}
	if !st.InterlockClosed && st.Source.HighVoltage {
		log.Warn("high voltage on while the interlock is open: switching it off")
		m.off(ctx, log, EventHighVoltageOffInterlock)
		return
	}
	if m.o.IdleHighVoltageOff > 0 && st.Source.HighVoltage && idleFor >= m.o.IdleHighVoltageOff {
		log.Info("high voltage idle: switching it off (safety.idle_high_voltage_off)", "idle", idleFor.Round(time.Second),
			"limit", m.o.IdleHighVoltageOff)
		m.off(ctx, log, EventHighVoltageOffIdle)
	}
}

// off switches high voltage off and counts the event.
func (m *Monitor) off(ctx context.Context, log *slog.Logger, event string) {
	ctx, cancel := context.WithTimeout(ctx, 5*time.Second)
	defer cancel()
	if err := m.o.Instrument.SetHighVoltage(ctx, false); err != nil {
		log.Error("could not switch high voltage off; trying again", "err", err, "event", event, "in", retryOff)
		m.mu.Lock()
		m.retryAt = m.o.Now().Add(retryOff)
		m.mu.Unlock()
		return
	}
	m.o.Recorder.SafetyEvent(event)
	m.Touch()
}

func (m *Monitor) retry() time.Time {
	m.mu.Lock()
	defer m.mu.Unlock()
	return m.retryAt
}
