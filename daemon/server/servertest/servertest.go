// Package servertest starts a real goniod in-process for tests: real gRPC on loopback, a temporary data
// directory and the simulated instrument, with a connected client.
package servertest

import (
	"bytes"
	"context"
	"errors"
	"io"
	"log/slog"
	"net"
	"os"
	"os/exec"
	"sync"
	"testing"
	"time"

	"goniod/client"
	"goniod/daemon/config"
	"goniod/daemon/server"
	"goniod/driver"

	_ "goniod/sim" // the "sim" driver
)

// Daemon is a running in-process goniod.
type Daemon struct {
	Addr, MetricsAddr string
	Data              string
	Client            *client.Client
	cancel            context.CancelFunc
	done              chan error
	logs              *syncBuffer
}

// Logs returns everything the daemon has logged so far (text format).
func (d *Daemon) Logs() string { return d.logs.String() }

type syncBuffer struct {
	mu sync.Mutex
	b  bytes.Buffer
}

func (s *syncBuffer) Write(p []byte) (int, error) {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.b.Write(p)
}

func (s *syncBuffer) String() string {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.b.String()
}

// Option changes the daemon's configuration before it starts.
type Option func(*config.File)

// WithSim sets a simulator setting (e.g. "speed", 5000.0; "seed", int64(3); "anode", "Mo").
func WithSim(key string, value any) Option {
	return func(f *config.File) {
		if err := f.SetDriverField("sim", key, value); err != nil {
			panic(err)
		}
	}
}

// WithData uses dir as the data directory (to restart a daemon on the same data).
func WithData(dir string) Option { return func(f *config.File) { f.Data = dir } }

// WithConfig changes the configuration directly.
func WithConfig(fn func(*config.File)) Option { return Option(fn) }

// Start runs a daemon on the simulator (speed 10000 unless an option says otherwise) and stops it when the test
// ends. Logs go to the test log when GONIOD_TEST_LOG is set, else nowhere.
func Start(t testing.TB, opts ...Option) *Daemon {
	t.Helper()
	return StartOn(t, nil, opts...)
}

// StartOn is Start on an instrument the test opened and holds (e.g. a *sim.Instrument, to open its door);
// nil opens the configured driver. The test closes the instrument.
func StartOn(t testing.TB, inst driver.Instrument, opts ...Option) *Daemon {
	t.Helper()
	cfg := &config.File{Driver: "sim", Data: t.TempDir()}
	WithSim("speed", 10000.0)(cfg)
	for _, o := range opts {
		o(cfg)
	}
	lis, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	mlis, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	cfg.Listen, cfg.MetricsListen = lis.Addr().String(), mlis.Addr().String()
	logs := &syncBuffer{}
	var w io.Writer = logs
	if os.Getenv("GONIOD_TEST_LOG") != "" {
		w = io.MultiWriter(logs, testWriter{t})
	}
	ctx, cancel := context.WithCancel(context.Background())
	d := &Daemon{Addr: cfg.Listen, MetricsAddr: cfg.MetricsListen, Data: cfg.Data, cancel: cancel, done: make(chan error, 1), logs: logs}
	ready := make(chan struct{})
	go func() {
		d.done <- server.Run(ctx, server.Options{Config: cfg, Version: "test", Log: slog.New(slog.NewTextHandler(w, nil)),
			Listener: lis, MetricsListener: mlis, Instrument: inst, Ready: func(string, string) { close(ready) }})
	}()
	select {
	case <-ready:
	case err := <-d.done:
		t.Fatalf("goniod did not start: %v", err)
	case <-time.After(30 * time.Second):
		t.Fatal("goniod not ready in 30 s")
	}
	c, err := client.New(d.Addr, client.WithTimeout(30*time.Second))
	if err != nil {
		t.Fatal(err)
	}
	d.Client = c
	t.Cleanup(func() { d.Stop(t) })
	return d
}

// Stop shuts the daemon down and waits for it (idempotent).
func (d *Daemon) Stop(t testing.TB) {
	t.Helper()
	if d.cancel == nil {
		return
	}
	d.Client.Close()
	d.cancel()
	d.cancel = nil
	select {
	case err := <-d.done:
		if err != nil && !errors.Is(err, context.Canceled) {
			t.Errorf("goniod stopped with: %v", err)
		}
	case <-time.After(30 * time.Second):
		t.Error("goniod did not stop in 30 s")
	}
}

// WaitEnd follows a scan until it ends and returns its final record and every point the watch delivered.
func (d *Daemon) WaitEnd(t testing.TB, id string) (client.Scan, []client.Point) {
	t.Helper()
	ctx, cancel := context.WithTimeout(context.Background(), 20*time.Second)
	defer cancel()
	st, err := d.Client.Watch(ctx, id, 0)
	if err != nil {
		t.Fatalf("watch %s: %v", id, err)
	}
	var last client.Scan
	var pts []client.Point
	for ev := range st.C {
		if ev.Point != nil {
			pts = append(pts, *ev.Point)
		}
		if ev.Scan != nil {
			last = *ev.Scan
		}
	}
	if err := st.Err(); err != nil {
		t.Fatalf("watch %s: %v", id, err)
	}
	return last, pts
}

type testWriter struct{ t testing.TB }

func (w testWriter) Write(b []byte) (int, error) {
	w.t.Log(string(b))
	return len(b), nil
}

// NeedProgram finds an external program the test needs (promtool, prometheus…). Without it the test is
// skipped, unless the environment variable CI is set: then it fails, so that CI never skips it silently.
func NeedProgram(t testing.TB, name, debianPackage string) string {
	t.Helper()
	path, err := exec.LookPath(name)
	if err != nil {
		if os.Getenv("CI") != "" {
			t.Fatalf("%s is needed in CI (Debian package %s): %v", name, debianPackage, err)
		}
		t.Skipf("%s not installed (Debian package %s); CI runs this test", name, debianPackage)
	}
	return path
}

// Points reads every stored point of a scan from this daemon.
func (d *Daemon) Points(t testing.TB, id string) []client.Point {
	t.Helper()
	return ReadPoints(t, d.Client, id)
}

// ReadPoints reads every stored point of a scan through a client (of any daemon, in-process or not),
// failing the test on an error or after a minute.
func ReadPoints(t testing.TB, c *client.Client, id string) []client.Point {
	t.Helper()
	ctx, cancel := context.WithTimeout(context.Background(), time.Minute)
	defer cancel()
	st, err := c.Points(ctx, id, 0, 0)
	if err != nil {
		t.Fatalf("points of %s: %v", id, err)
	}
	var out []client.Point
	for p := range st.C {
		out = append(out, p)
	}
	if err := st.Err(); err != nil {
		t.Fatalf("points of %s: %v", id, err)
	}
	return out
}
