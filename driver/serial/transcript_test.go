package serial_test

import (
	"bytes"
	"context"
	"errors"
	"flag"
	"io"
	"log/slog"
	"math"
	"os"
	"slices"
	"testing"
	"time"

	"goniod/driver"
	"goniod/driver/drivertest"
	"goniod/driver/serial"
)

var update = flag.Bool("update", false, "re-record testdata/transcripts/goniod-session.txt from the simulator on a pseudo-terminal")

func loadTranscript(t *testing.T, path string) *drivertest.Transcript {
	t.Helper()
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	tr, err := drivertest.ParseTranscript(path, f)
	if err != nil {
		t.Fatal(err)
	}
	return tr
}

// playDriver opens the driver on a player of the transcript: each reconnection gets the same player.
func playDriver(t *testing.T, prof *serial.Profile, tr *drivertest.Transcript) *serial.Driver {
	t.Helper()
	p := drivertest.NewPlayer(t, tr)
	ctx, cancel := context.WithTimeout(context.Background(), 5*time.Second)
	defer cancel()
	drv, err := serial.Open(ctx, prof, serial.Settings{Device: "player", ReadTimeout: 100 * time.Millisecond},
		func(serial.Settings) (serial.Port, error) { return p, nil }, testLog(t))
	if err != nil {
		t.Fatalf("open on the transcript: %v", err)
	}
	return drv
}

// session is a scan point and the other operations, on the built-in profile; it checks what it gets.
func session(t *testing.T, drv *serial.Driver) {
	t.Helper()
	ctx, cancel := context.WithTimeout(context.Background(), 10*time.Second)
	defer cancel()
	if id, err := drv.Identify(ctx); err != nil || id != "goniod,simulated spectrometer,Cu-LiF(200),seed 1" {
		t.Errorf("Identify = %q, %v", id, err)
	}
	got, err := drv.MoveAll(ctx, map[string]float64{"theta": 20.05, "twotheta": 40.1})
	if err != nil || got["theta"] != 20.05 || got["twotheta"] != 40.1 {
		t.Errorf("MoveAll = %v, %v", got, err)
	}
	if c, err := drv.Count(ctx, 0); err != nil || !slices.Equal(c.Channels, []uint64{0}) {
		t.Errorf("Count(0) = %+v, %v", c, err)
	}
	if st, err := drv.Status(ctx); err != nil || st != (driver.Status{HighVoltage: false, InterlockClosed: true}) {
		t.Errorf("Status = %+v, %v", st, err)
	}
	if err := drv.SetSource(ctx, 30, 0.8); err != nil {
		t.Error(err)
	}
	if s, err := drv.SourceState(ctx); err != nil || s != (driver.SourceState{KV: 30, MA: 0.8}) {
		t.Errorf("SourceState = %+v, %v", s, err)
	}
	if _, err := drv.Move(ctx, "theta", 200); !errors.Is(err, driver.ErrOutOfRange) {
		t.Errorf("Move(theta, 200): err = %v, want driver.ErrOutOfRange", err)
	}
	if err := drv.Feed(ctx); err != nil {
		t.Error(err)
	}
}

// TestSessionTranscript plays the recorded conversation of a session with the simulator back to the driver:
// the driver must send exactly the recorded commands (the bytes of a scan point among them) and read the
// recorded replies right. -update records it again from the simulator on a pseudo-terminal.
func TestSessionTranscript(t *testing.T) {
	const path = "testdata/transcripts/goniod-session.txt"
	if *update {
		tr := recordSession(t, session)
		var b bytes.Buffer
		b.WriteString("# A session of the serial driver with goniosim's instrument (built-in profile), recorded by\n" +
			"# go test ./driver/serial -run TestSessionTranscript -update\n")
		if err := tr.Format(&b); err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(path, b.Bytes(), 0o644); err != nil {
			t.Fatal(err)
		}
	}
	drv := playDriver(t, serial.DefaultProfile(), loadTranscript(t, path))
	session(t, drv)
	drv.Close()
}

// TestExampleProfile drives the hypothetical instrument of profiles/example-bench.yaml through a written
// transcript: steps, milliseconds, volts and microamperes, CR LF, two channels, and the fallbacks for the
// operations it lacks (moving one axis after the other, status in two queries, halting by switching high
// voltage off).
func TestExampleProfile(t *testing.T) {
	prof, err := serial.LoadProfile("profiles/example-bench.yaml")
	if err != nil {
		t.Fatal(err)
	}
	drv := playDriver(t, prof, loadTranscript(t, "testdata/transcripts/example-bench.txt"))
	defer drv.Close()
	ctx, cancel := context.WithTimeout(context.Background(), 10*time.Second)
	defer cancel()
	if d := drv.Describe(); d.Anode != "Mo" || len(d.Channels) != 2 || d.Axes[0].ResolutionDeg != 0.005 {
		t.Errorf("Describe = %+v", d)
	}
	got, err := drv.MoveAll(ctx, map[string]float64{"theta": 22.5, "twotheta": 45})
	if err != nil || got["theta"] != 22.5 || got["twotheta"] != 45 {
		t.Errorf("MoveAll = %v, %v", got, err)
	}
	if c, err := drv.Count(ctx, 250*time.Millisecond); err != nil || !slices.Equal(c.Channels, []uint64{1234, 56}) {
		t.Errorf("Count = %+v, %v", c, err)
	}
	if err := drv.SetSource(ctx, 25, 0.4); err != nil {
		t.Error(err)
	}
	if s, err := drv.SourceState(ctx); err != nil || math.Abs(s.KV-25) > 1e-9 || math.Abs(s.MA-0.4) > 1e-9 || s.HighVoltage {
		t.Errorf("SourceState = %+v, %v", s, err)
	}
	if st, err := drv.Status(ctx); err != nil || st.HighVoltage || !st.InterlockClosed {
		t.Errorf("Status = %+v, %v", st, err)
	}
	if err := drv.SetHighVoltage(ctx, true); !errors.Is(err, driver.ErrInterlockOpen) {
		t.Errorf("high voltage on with the door open: err = %v, want driver.ErrInterlockOpen", err)
	}
	if _, err := drv.Move(ctx, "twotheta", 170); !errors.Is(err, driver.ErrOutOfRange) {
		t.Errorf("Move beyond the limit: err = %v, want driver.ErrOutOfRange", err)
	}
	if err := drv.Halt(); err != nil {
		t.Errorf("Halt: %v", err)
	}
}

// TestFaultTranscript: a garbled reply is retried after a resync, a silent count is not retried, and a
// vanished device takes the link down.
func TestFaultTranscript(t *testing.T) {
	drv := playDriver(t, serial.DefaultProfile(), loadTranscript(t, "testdata/transcripts/goniod-faults.txt"))
	defer drv.Close()
	ctx, cancel := context.WithTimeout(context.Background(), 10*time.Second)
	defer cancel()
	if got, err := drv.Position(ctx, "theta"); err != nil || got != 12.5 {
		t.Errorf("Position after a garbled reply = %v, %v; want 12.5", got, err)
	}
	if _, err := drv.Count(ctx, 0); err == nil || errors.Is(err, driver.ErrLinkDown) {
		t.Errorf("Count with no reply: err = %v; want a timeout, link still up", err)
	}
	if st, err := drv.Status(ctx); err != nil || !st.InterlockClosed {
		t.Errorf("Status after the lost count = %+v, %v", st, err)
	}
	if _, err := drv.Position(ctx, "twotheta"); !errors.Is(err, driver.ErrLinkDown) {
		t.Errorf("Position when the device vanished: err = %v, want driver.ErrLinkDown", err)
	}
	if s := drv.LinkStatus(); s.State == driver.LinkUp || s.Errors != 3 || s.Timeouts != 1 {
		t.Errorf("LinkStatus = %+v; want down, 3 errors, 1 timeout", s)
	}
}

// testLog is the driver's log: the test log with GONIOD_TEST_LOG set, else nothing.
func testLog(t testing.TB) *slog.Logger {
	if os.Getenv("GONIOD_TEST_LOG") == "" {
		return slog.New(slog.DiscardHandler)
	}
	return slog.New(slog.NewTextHandler(testWriter{t}, &slog.HandlerOptions{Level: slog.LevelDebug}))
}

type testWriter struct{ t testing.TB }

func (w testWriter) Write(b []byte) (int, error) {
	w.t.Log(string(b))
	return len(b), nil
}

var _ io.Writer = testWriter{}
