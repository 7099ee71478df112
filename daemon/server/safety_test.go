package server_test

import (
	"context"
	"errors"
	"fmt"
	"io"
	"log/slog"
	"net/http"
	"strings"
	"sync"
	"testing"
	"time"

	"goniod/client"
	"goniod/daemon/config"
	"goniod/daemon/server"
	"goniod/daemon/server/servertest"
	"goniod/sim"
)

// eventually polls cond every 20 ms until it holds or within passes.
func eventually(t *testing.T, within time.Duration, what string, cond func() (bool, string)) {
	t.Helper()
	deadline := time.Now().Add(within)
	for {
		ok, last := cond()
		if ok {
			return
		}
		if time.Now().After(deadline) {
			t.Fatalf("%s: not after %v (last: %s)", what, within, last)
		}
		time.Sleep(20 * time.Millisecond)
	}
}

func metricsText(t *testing.T, d *servertest.Daemon) string {
	t.Helper()
	resp, err := http.Get("http://" + d.MetricsAddr + "/metrics")
	if err != nil {
		t.Fatal(err)
	}
	defer resp.Body.Close()
	b, err := io.ReadAll(resp.Body)
	if err != nil {
		t.Fatal(err)
	}
	return string(b)
}

// collectWatch follows a scan from its first point and returns the states and point indexes it saw.
func collectWatch(ctx context.Context, c *client.Client, id string) (states []client.State, indexes []int, err error) {
	st, err := c.Watch(ctx, id, 0)
	if err != nil {
		return nil, nil, err
	}
	for ev := range st.C {
		if ev.Point != nil {
			indexes = append(indexes, ev.Point.Index)
		}
		if ev.Scan != nil {
			states = append(states, ev.Scan.State)
		}
	}
	return states, indexes, st.Err()
}

// TestInterlockOpensMidScan opens the simulator's enclosure door during a scan with high voltage on: the scan
// pauses, high voltage is off, the event is in the log and the metrics, high voltage cannot be switched on
// until the door closes, and after closing the door and resuming the scan completes with every point once.
func TestInterlockOpensMidScan(t *testing.T) {
	in, err := sim.New(sim.Config{Seed: 4, Speed: 50}, nil)
	if err != nil {
		t.Fatal(err)
	}
	d := servertest.StartOn(t, in)
	ctx := context.Background()
	s, err := d.Client.Submit(ctx, client.ScanRequest{Kind: client.Coupled, From: 20, To: 30, Step: 0.1, Dwell: time.Second,
		Source: &client.Source{KV: 30, MA: 0.8}})
	if err != nil {
		t.Fatal(err)
	}
	type watched struct {
		states  []client.State
		indexes []int
		err     error
	}
	watchDone := make(chan watched, 1)
	go func() {
		var w watched
		w.states, w.indexes, w.err = collectWatch(ctx, d.Client, s.ID)
		watchDone <- w
	}()
	eventually(t, 20*time.Second, "five points", func() (bool, string) {
		got, err := d.Client.Scan(ctx, s.ID)
		return err == nil && got.PointsDone >= 5, fmt.Sprint(got.PointsDone, err)
	})
	in.SetDoor(true)
	var paused client.Scan
	eventually(t, 10*time.Second, "scan paused", func() (bool, string) {
		paused, err = d.Client.Scan(ctx, s.ID)
		return err == nil && paused.State == client.Paused, fmt.Sprint(paused.State, err)
	})
	if !strings.Contains(paused.Reason, "interlock") {
		t.Errorf("paused because %q, want the interlock named", paused.Reason)
	}
	st, err := d.Client.State(ctx)
	if err != nil || st.HighVoltage || st.InterlockClosed {
		t.Fatalf("after the door opened: high voltage %v, interlock closed %v (%v)", st.HighVoltage, st.InterlockClosed, err)
	}
	eventually(t, 5*time.Second, "the opening in the metrics", func() (bool, string) {
		m := metricsText(t, d)
		return strings.Contains(m, "\ngoniod_interlock_closed 0") && strings.Contains(m, "\ngoniod_high_voltage_on 0") &&
			strings.Contains(m, `goniod_safety_events_total{event="interlock_opened"} 1`), ""
	})
	if !logLine(d.Logs(), "interlock", "scan="+s.ID) {
		t.Errorf("no log line names the interlock and the scan:\n%s", d.Logs())
	}
	on := true
	if _, err := d.Client.SetSource(ctx, client.SourceChange{HighVoltage: &on}); !errors.Is(err, client.ErrRefused) {
		t.Errorf("high voltage on with the door open: %v, want a refusal", err)
	}
	if _, err := d.Client.Resume(ctx, s.ID); err != nil {
		t.Fatal(err)
	}
	eventually(t, 10*time.Second, "resumed scan paused again with the door open", func() (bool, string) {
		got, err := d.Client.Scan(ctx, s.ID)
		return err == nil && got.State == client.Paused && got.PointsDone == paused.PointsDone, fmt.Sprint(got.State, got.PointsDone, err)
	})
	if st, _ := d.Client.State(ctx); st.HighVoltage {
		t.Fatal("high voltage on with the door open after a resume")
	}
	in.SetDoor(false)
	if _, err := d.Client.Resume(ctx, s.ID); err != nil {
		t.Fatal(err)
	}
	final, _ := d.WaitEnd(t, s.ID)
	if final.State != client.Done {
		t.Fatalf("scan ended %s (%s)", final.State, final.Reason)
	}
	w := <-watchDone
	if w.err != nil {
		t.Fatal(w.err)
	}
	if len(w.indexes) != final.PointsTotal {
		t.Fatalf("the watcher got %d points, the scan has %d", len(w.indexes), final.PointsTotal)
	}
	for i, idx := range w.indexes {
		if idx != i {
			t.Fatalf("watched point %d has index %d", i, idx)
		}
	}
	if !containsState(w.states, client.Paused) || w.states[len(w.states)-1] != client.Done {
		t.Errorf("watched states %v: want a pause and done last", w.states)
	}
}

func containsState(states []client.State, s client.State) bool {
	for _, x := range states {
		if x == s {
			return true
		}
	}
	return false
}

// logLine reports whether one line of the log contains every part.
func logLine(logs string, parts ...string) bool {
	for _, line := range strings.Split(logs, "\n") {
		all := true
		for _, p := range parts {
			all = all && strings.Contains(line, p)
		}
		if all {
			return true
		}
	}
	return false
}

// TestIdleHighVoltageOff: with safety.idle_high_voltage_off set, high voltage switched on by hand goes off by
// itself after that long with nothing to do, and the daemon says so.
func TestIdleHighVoltageOff(t *testing.T) {
	d := servertest.Start(t, servertest.WithConfig(func(f *config.File) { f.Safety.IdleHighVoltageOff = 400 * time.Millisecond }))
	ctx := context.Background()
	on := true
	st, err := d.Client.SetSource(ctx, client.SourceChange{HighVoltage: &on})
	if err != nil || !st.HighVoltage {
		t.Fatalf("high voltage on by hand: %v, on %v", err, st.HighVoltage)
	}
	switched := time.Now()
	eventually(t, 5*time.Second, "high voltage off after the idle time", func() (bool, string) {
		st, err := d.Client.State(ctx)
		return err == nil && !st.HighVoltage, fmt.Sprint(err)
	})
	if idle := time.Since(switched); idle < 400*time.Millisecond {
		t.Errorf("high voltage went off after %v, before the idle time of 400ms", idle)
	}
	if !logLine(d.Logs(), "idle_high_voltage_off") || !strings.Contains(metricsText(t, d), `goniod_safety_events_total{event="high_voltage_off_idle"} 1`) {
		t.Errorf("the idle switch-off is not in the log or the metrics:\n%s", d.Logs())
	}
}

// TestWatchersOverGRPC: gRPC watchers of one scan, some slow and some starting after it ended, each get the
// record, every point in order exactly once, and the end.
func TestWatchersOverGRPC(t *testing.T) {
	d := servertest.Start(t, servertest.WithSim("speed", 2000.0))
	ctx, cancel := context.WithTimeout(context.Background(), time.Minute)
	defer cancel()
	s, err := d.Client.Submit(ctx, client.ScanRequest{Kind: client.Timed, Points: 600, Dwell: time.Second})
	if err != nil {
		t.Fatal(err)
	}
	const live, slow, late = 40, 5, 5
	var wg sync.WaitGroup
	errs := make(chan error, live+slow+late)
	follow := func(name string, pause time.Duration) {
		defer wg.Done()
		st, err := d.Client.Watch(ctx, s.ID, 0)
		if err != nil {
			errs <- err
			return
		}
		next, ended := 0, false
		for ev := range st.C {
			switch {
			case ended:
				errs <- fmt.Errorf("%s: event after the end", name)
			case ev.Point != nil:
				if ev.Point.Index != next {
					errs <- fmt.Errorf("%s: point %d where %d was due", name, ev.Point.Index, next)
				}
				next++
				time.Sleep(pause)
			case ev.End:
				ended = true
			}
		}
		if err := st.Err(); err != nil || !ended || next != 600 {
			errs <- fmt.Errorf("%s: %d points, end %v, err %v", name, next, ended, err)
		}
	}
	for i := range live {
		wg.Add(1)
		go follow(fmt.Sprint("live ", i), 0)
	}
	for i := range slow {
		wg.Add(1)
		go follow(fmt.Sprint("slow ", i), time.Millisecond)
	}
	d.WaitEnd(t, s.ID)
	for i := range late {
		wg.Add(1)
		go follow(fmt.Sprint("late ", i), 0)
	}
	wg.Wait()
	close(errs)
	for err := range errs {
		t.Error(err)
	}
}

// TestTLSSettingsIncomplete: a client CA or a key without a certificate is an error at start, not a daemon
// that silently serves without TLS.
func TestTLSSettingsIncomplete(t *testing.T) {
	for _, sec := range []config.Security{{TLSClientCA: "ca.pem"}, {TLSKey: "key.pem"}, {TLSCert: "cert.pem"}} {
		err := server.Run(context.Background(), server.Options{Config: &config.File{Driver: "sim", Data: t.TempDir(),
			Listen: "127.0.0.1:0", MetricsListen: "127.0.0.1:0", Security: sec}, Log: slog.New(slog.DiscardHandler)})
		if err == nil || !strings.Contains(err.Error(), "TLS") {
			t.Errorf("%+v: %v, want an error about TLS", sec, err)
		}
	}
}
