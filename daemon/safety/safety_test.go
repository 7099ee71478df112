package safety

import (
	"bytes"
	"context"
	"errors"
	"log/slog"
	"strings"
	"sync"
	"testing"
	"time"

	"goniod/daemon/instrument"
	"goniod/daemon/scan"
)

type fakeInstrument struct {
	mu      sync.Mutex
	st      instrument.State
	offs    int
	failOff bool
}

func (f *fakeInstrument) State() instrument.State {
	f.mu.Lock()
	defer f.mu.Unlock()
	return f.st
}

func (f *fakeInstrument) SetHighVoltage(_ context.Context, on bool) error {
	f.mu.Lock()
	defer f.mu.Unlock()
	if on {
		return errors.New("the monitor must never switch high voltage on")
	}
	f.offs++
	if f.failOff {
		return errors.New("link down")
	}
	f.st.Source.HighVoltage = false
	return nil
}

func (f *fakeInstrument) set(hv, closed bool) {
	f.mu.Lock()
	defer f.mu.Unlock()
	f.st.Source.HighVoltage, f.st.InterlockClosed = hv, closed
}

type fakeScans struct {
	running *scan.Record
	queued  int
}

func (f *fakeScans) Running() (scan.Record, bool) {
	if f.running == nil {
		return scan.Record{}, false
	}
	return *f.running, true
}
func (f *fakeScans) QueueLength() int { return f.queued }

type events map[string]int

func (e events) SafetyEvent(ev string) { e[ev]++ }

type rig struct {
	inst  *fakeInstrument
	scans *fakeScans
	ev    events
	logs  *bytes.Buffer
	now   time.Time
	m     *Monitor
}

func newRig(idle time.Duration) *rig {
	r := &rig{inst: &fakeInstrument{}, scans: &fakeScans{}, ev: events{}, logs: &bytes.Buffer{}, now: time.Unix(1000, 0)}
	r.inst.set(false, true)
	r.m = New(Options{Instrument: r.inst, Scans: r.scans, Recorder: r.ev, Log: slog.New(slog.NewTextHandler(r.logs, nil)),
		IdleHighVoltageOff: idle, Now: func() time.Time { return r.now }})
	return r
}

func (r *rig) after(d time.Duration) {
	r.now = r.now.Add(d)
	r.m.Check(context.Background())
}

func TestInterlockOpening(t *testing.T) {
	r := newRig(0)
	r.scans.running = &scan.Record{ID: "scan-000003", State: scan.Running}
	r.inst.set(true, true)
	r.after(0)
	if r.ev[EventInterlockOpened] != 0 || r.inst.offs != 0 {
		t.Fatalf("acted on a closed interlock: events %v, offs %d", r.ev, r.inst.offs)
	}
	r.after(200 * time.Millisecond)
	r.scans.running = nil   // the runner saw it first and paused the scan
	r.inst.set(true, false) // the door opens; the cache still shows high voltage on
	r.after(200 * time.Millisecond)
	if r.ev[EventInterlockOpened] != 1 || r.ev[EventHighVoltageOffInterlock] != 1 || r.inst.offs != 1 {
		t.Fatalf("after the interlock opened: events %v, offs %d; want one opening and one switch-off", r.ev, r.inst.offs)
	}
	r.after(200 * time.Millisecond)
	if r.ev[EventInterlockOpened] != 1 || r.inst.offs != 1 {
		t.Errorf("an interlock that stays open counted again: events %v, offs %d", r.ev, r.inst.offs)
	}
	for _, want := range []string{`msg="interlock opened"`, "scan=scan-000003", "high voltage on while the interlock is open"} {
		if !strings.Contains(r.logs.String(), want) {
			t.Errorf("log lacks %q:\n%s", want, r.logs)
		}
	}
	r.inst.set(false, true)
	r.after(time.Second)
	r.inst.set(false, false)
	r.after(time.Second)
	if r.ev[EventInterlockOpened] != 2 || r.ev[EventHighVoltageOffInterlock] != 1 {
		t.Errorf("a second opening with high voltage off: events %v; want 2 openings, 1 switch-off", r.ev)
	}
}

func TestInterlockOpenAtStart(t *testing.T) {
	r := newRig(0)
	r.inst.set(false, false)
	r.after(0)
	if len(r.ev) != 0 || !strings.Contains(r.logs.String(), "interlock open at start") {
		t.Errorf("open at start: events %v, log %s", r.ev, r.logs)
	}
}

func TestIdleHighVoltageOff(t *testing.T) {
	r := newRig(10 * time.Minute)
	r.inst.set(true, true)
	r.after(0)
	r.after(9 * time.Minute)
	if r.inst.offs != 0 {
		t.Fatal("switched off before the idle time")
	}
	r.m.Touch() // a control call
	r.after(9 * time.Minute)
	if r.inst.offs != 0 {
		t.Fatal("switched off although a control call came 9 minutes ago")
	}
	r.scans.running = &scan.Record{ID: "scan-000001", State: scan.Running}
	r.after(30 * time.Minute)
	r.scans.running, r.scans.queued = nil, 1
	r.after(30 * time.Minute)
	if r.inst.offs != 0 {
		t.Fatal("switched off while a scan ran or waited")
	}
	r.scans.queued = 0
	r.after(9 * time.Minute)
	if r.inst.offs != 0 {
		t.Fatal("switched off 9 minutes after the queue emptied")
	}
	r.after(time.Minute)
	if r.inst.offs != 1 || r.ev[EventHighVoltageOffIdle] != 1 || r.inst.State().Source.HighVoltage {
		t.Fatalf("after 10 idle minutes: offs %d, events %v", r.inst.offs, r.ev)
	}
	if !strings.Contains(r.logs.String(), "idle_high_voltage_off") {
		t.Errorf("log does not name the setting: %s", r.logs)
	}
}

func TestIdleOffDisabled(t *testing.T) {
	r := newRig(0)
	r.inst.set(true, true)
	r.after(0)
	r.after(1000 * time.Hour)
	if r.inst.offs != 0 {
		t.Fatal("switched off with the idle timeout disabled")
	}
}

func TestSwitchOffFailureRetries(t *testing.T) {
	r := newRig(0)
	r.inst.failOff = true
	r.inst.set(true, true)
	r.after(0)
	r.inst.set(true, false)
	r.after(0)
	r.after(time.Second)
	if r.inst.offs != 1 || r.ev[EventHighVoltageOffInterlock] != 0 {
		t.Fatalf("failed switch-off: %d tries within 1 s, events %v; want 1 try and no event", r.inst.offs, r.ev)
	}
	r.after(retryOff)
	if r.inst.offs != 2 {
		t.Fatalf("%d tries after the retry delay, want 2", r.inst.offs)
	}
}
