//go:build unix

package engine_test

import (
	"bufio"
	"bytes"
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"math/rand/v2"
	"net"
	"os"
	"os/exec"
	"path/filepath"
	"runtime"
	"strconv"
	"sync"
	"syscall"
	"testing"
	"time"

	"goniod/client"
	goniodv1 "goniod/proto/goniod/v1"
)

// The crash test runs the real daemon binary on the simulator, kills it with SIGKILL at random moments while a
// scan runs (and now and then while it starts; after some kills it damages the points file's tail as a power cut
// would), restarts it on the same data directory and checks after every kill: every point a watcher received is on disk with the same counts, no point is duplicated or torn, the
// scan is interrupted (or held, when the kill came between a resume and its start) and resumes to completion,
// work that was queued is held and never starts without a release, and high voltage is off after the restart.
func TestCrashAndRestart(t *testing.T) {
	bin := buildDaemon(t)
	data := t.TempDir()
	rng := rand.New(rand.NewPCG(20261202, 5))
	const trials = 24
	d := startDaemon(t, bin, data)
	ctx := context.Background()
	// Scan A is the one killed; B waits behind it and must come back held after the first kill.
	scanA := client.ScanRequest{Kind: client.Coupled, From: 10, To: 55, Step: 0.05, Dwell: time.Second,
		Source: &client.Source{KV: 30, MA: 0.8}, Label: "crash test"}
	a, err := d.client.Submit(ctx, scanA)
	if err != nil {
		t.Fatal(err)
	}
	b, err := d.client.Submit(ctx, client.ScanRequest{Kind: client.Timed, Points: 5, Dwell: time.Second, Source: &client.Source{KV: 20, MA: 0.5}})
	if err != nil {
		t.Fatal(err)
	}
	current, scansDone := a.ID, 0
	var watched, killsMidScan, killsAtStart, tornTails, injected int
	for trial := 0; trial < trials; trial++ {
		w := watch(d.client, current)
		time.Sleep(time.Duration(rng.IntN(350)+10) * time.Millisecond)
		d.kill(t)
		seen := w.stop(t)
		watched += len(seen)
		n, torn := checkDisk(t, data, current, seen)
		tornTails += torn
		if rng.IntN(3) == 0 && injectTornTail(t, data, current, rng) { // as a power cut mid-write would leave it
			injected++
		}
		if rng.IntN(6) == 0 { // now and then a kill while the daemon starts up
			early := startProcess(t, bin, data)
			time.Sleep(time.Duration(rng.IntN(40)) * time.Millisecond)
			early.kill(t)
			killsAtStart++
		}
		d = startDaemon(t, bin, data)
		s, err := d.client.Scan(ctx, current)
		if err != nil {
			t.Fatal(err)
		}
		if hb, err := d.client.Scan(ctx, b.ID); err != nil || hb.State != client.Held || hb.PointsDone != 0 {
			t.Fatalf("trial %d: queued scan %s is %s with %d points (%v), want held with none", trial, b.ID, hb.State, hb.PointsDone, err)
		}
		if st, err := d.client.State(ctx); err != nil || st.HighVoltage {
			t.Fatalf("trial %d: high voltage %v after a restart (%v)", trial, st.HighVoltage, err)
		}
		if s.PointsDone != n {
			t.Fatalf("trial %d: the daemon reports %d points of %s, the disk holds %d", trial, s.PointsDone, current, n)
		}
		checkContiguous(t, apiPoints(t, d.client, current), n)
		switch s.State {
		case client.Interrupted:
			killsMidScan++
			_, err = d.client.Resume(ctx, current)
		case client.Held: // killed after a resume, before the scan started again: queued work comes back held
			_, err = d.client.Release(ctx, current)
		case client.Done:
			scansDone++
			next, serr := d.client.Submit(ctx, scanA)
			current, err = next.ID, serr
		default:
			t.Fatalf("trial %d: after a kill scan %s is %s (%s)", trial, current, s.State, s.Reason)
		}
		if err != nil {
			t.Fatalf("trial %d: %v", trial, err)
		}
	}
	final := waitEnd(t, d.client, current)
	if final.State != client.Done {
		t.Fatalf("scan %s ended %s after the trials: %s", current, final.State, final.Reason)
	}
	checkContiguous(t, apiPoints(t, d.client, current), final.PointsTotal)
	if _, err := d.client.Release(ctx, b.ID); err != nil {
		t.Fatal(err)
	}
	if final := waitEnd(t, d.client, b.ID); final.State != client.Done {
		t.Fatalf("released scan ended %s", final.State)
	}
	t.Logf("%d kills (%d mid-scan, %d during start-up), %d points seen by watchers all on disk, %d torn tails left by a kill, %d damaged tails injected and dropped, %d scans completed across kills",
		trials+killsAtStart, killsMidScan, killsAtStart, watched, tornTails, injected, scansDone+1)
	d.kill(t)
}

// buildDaemon builds cmd/goniod into a temporary directory, with the race detector when the test has it (so
// the build reuses the test's compiled packages, and the daemon is checked for races too).
func buildDaemon(t *testing.T) string {
	t.Helper()
	gobin, err := exec.LookPath("go")
	if err != nil {
		gobin = filepath.Join(runtime.GOROOT(), "bin", "go")
	}
	bin := filepath.Join(t.TempDir(), "goniod")
	args := []string{"build", "-o", bin}
	if raceEnabled {
		args = append(args, "-race")
	}
	out, err := exec.Command(gobin, append(args, "goniod/cmd/goniod")...).CombinedOutput()
	if err != nil {
		t.Fatalf("go build goniod: %v\n%s", err, out)
	}
	return bin
}

// daemonProcess is a goniod process.
type daemonProcess struct {
	cmd    *exec.Cmd
	addr   string
	log    *syncLog
	client *client.Client
	done   chan struct{}
}

type syncLog struct {
	mu sync.Mutex
	b  bytes.Buffer
}

func (l *syncLog) Write(p []byte) (int, error) {
	l.mu.Lock()
	defer l.mu.Unlock()
	return l.b.Write(p)
}

func (l *syncLog) String() string {
	l.mu.Lock()
	defer l.mu.Unlock()
	return l.b.String()
}

func freeAddr(t *testing.T) string {
	t.Helper()
	l, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	defer l.Close()
	return l.Addr().String()
}

// startProcess starts goniod on the simulator (speed 500: a 1 s dwell takes 2 ms) without waiting for it.
func startProcess(t *testing.T, bin, data string, extra ...string) *daemonProcess {
	t.Helper()
	p := &daemonProcess{addr: freeAddr(t), log: &syncLog{}, done: make(chan struct{})}
	args := append([]string{"--sim", "--sim-seed", "7", "--sim-speed", "500", "--listen", p.addr,
		"--metrics-listen", freeAddr(t), "--data", data}, extra...)
	p.cmd = exec.Command(bin, args...)
	p.cmd.Stdout, p.cmd.Stderr = p.log, p.log
	if err := p.cmd.Start(); err != nil {
		t.Fatal(err)
	}
	go func() { p.cmd.Wait(); close(p.done) }()
	t.Cleanup(func() { p.kill(t) })
	return p
}

// startDaemon starts goniod and waits until it answers. It waits for the port before the first call: a gRPC
// connection that failed once waits a second before it tries again.
func startDaemon(t *testing.T, bin, data string, extra ...string) *daemonProcess {
	t.Helper()
	p := startProcess(t, bin, data, extra...)
	deadline := time.Now().Add(30 * time.Second)
	for {
		select {
		case <-p.done:
			t.Fatalf("goniod exited at start:\n%s", p.log)
		default:
		}
		if conn, err := net.Dial("tcp", p.addr); err == nil {
			conn.Close()
			break
		}
		if time.Now().After(deadline) {
			t.Fatalf("goniod not listening in 30 s:\n%s", p.log)
		}
		time.Sleep(5 * time.Millisecond)
	}
	c, err := client.New(p.addr, client.WithTimeout(10*time.Second))
	if err != nil {
		t.Fatal(err)
	}
	p.client = c
	if _, err := c.State(context.Background()); err != nil {
		t.Fatalf("goniod does not answer: %v\n%s", err, p.log)
	}
	return p
}

// kill sends SIGKILL and waits for the process to end (idempotent).
func (p *daemonProcess) kill(t *testing.T) {
	t.Helper()
	select {
	case <-p.done:
	default:
		if err := p.cmd.Process.Signal(syscall.SIGKILL); err != nil && !errors.Is(err, os.ErrProcessDone) {
			t.Fatal(err)
		}
		<-p.done
	}
	if p.client != nil {
		p.client.Close()
		p.client = nil
	}
}

// watcher collects the points one watch received, by index.
type watcher struct {
	cancel context.CancelFunc
	done   chan struct{}
	seen   map[int]client.Point
	err    error
}

func watch(c *client.Client, id string) *watcher {
	ctx, cancel := context.WithCancel(context.Background())
	w := &watcher{cancel: cancel, done: make(chan struct{}), seen: map[int]client.Point{}}
	go func() {
		defer close(w.done)
		st, err := c.Watch(ctx, id, 0)
		if err != nil {
			return
		}
		next := 0
		for ev := range st.C {
			if ev.Point == nil {
				continue
			}
			if ev.Point.Index != next {
				w.err = fmt.Errorf("watch of %s sent point %d after %d", id, ev.Point.Index, next-1)
			}
			next = ev.Point.Index + 1
			w.seen[ev.Point.Index] = *ev.Point
		}
	}()
	return w
}

// stop ends the watch and returns what it received; a watch may not skip or repeat a point.
func (w *watcher) stop(t *testing.T) map[int]client.Point {
	t.Helper()
	w.cancel()
	<-w.done
	if w.err != nil {
		t.Fatal(w.err)
	}
	return w.seen
}

// checkDisk reads a scan's points file as the killed daemon left it, independently of the daemon: every line
// but a last one without its newline must be an intact point, in index order from 0, and every watched point
// must be there with the same counts and angles. It returns the number of intact points and whether the file
// ended in a torn line.
func checkDisk(t *testing.T, data, id string, seen map[int]client.Point) (points, torn int) {
	t.Helper()
	b, err := os.ReadFile(filepath.Join(data, "scans", id, "points.csv"))
	if err != nil {
		t.Fatal(err)
	}
	sc := bufio.NewScanner(bytes.NewReader(b))
	sc.Buffer(nil, 1<<20)
	if !sc.Scan() {
		t.Fatalf("%s: no header", id)
	}
	table, err := goniodv1.ParsePointTable(sc.Text())
	if err != nil {
		t.Fatal(err)
	}
	complete := bytes.Count(b, []byte{'\n'}) - 1
	if len(b) > 0 && b[len(b)-1] != '\n' {
		torn = 1
	}
	var onDisk []*goniodv1.Point
	for i := 0; i < complete && sc.Scan(); i++ {
		p, err := table.DecodeCSV(append(sc.Bytes(), '\n'))
		if err != nil {
			t.Fatalf("%s line %d is damaged: %v", id, i+2, err)
		}
		if int(p.Index) != i {
			t.Fatalf("%s line %d holds point %d: duplicated or out of order", id, i+2, p.Index)
		}
		onDisk = append(onDisk, p)
	}
	for idx, p := range seen {
		if idx >= len(onDisk) {
			t.Fatalf("%s: a watcher received point %d, the disk holds %d points", id, idx, len(onDisk))
		}
		dp := onDisk[idx]
		if dp.Counts != p.Counts || dp.Axes[0].ActualDeg != p.Axes[0].Actual {
			t.Fatalf("%s point %d: watched %d counts at %g°, on disk %d at %g°", id, idx, p.Counts, p.Axes[0].Actual, dp.Counts, dp.Axes[0].ActualDeg)
		}
	}
	return len(onDisk), torn
}

// injectTornTail appends a damaged last line to a scan's points file, as a power cut during a write leaves it:
// part of the next point's line, or a line of garbage. Only a scan that was running gets one (the daemon
// checks the points files of unfinished scans at start).
func injectTornTail(t *testing.T, data, id string, rng *rand.Rand) bool {
	t.Helper()
	rec, err := os.ReadFile(filepath.Join(data, "scans", id, "scan.json"))
	if err != nil {
		t.Fatal(err)
	}
	var r struct{ State string }
	if err := json.Unmarshal(rec, &r); err != nil {
		t.Fatal(err)
	}
	if r.State != "running" {
		return false
	}
	path := filepath.Join(data, "scans", id, "points.csv")
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	lines := bytes.Split(bytes.TrimSuffix(b, []byte{'\n'}), []byte{'\n'})
	tail := []byte("\x00\x00garbage,1,2\n")
	if last := lines[len(lines)-1]; len(lines) > 1 && rng.IntN(2) == 0 {
		tail = append([]byte(strconv.Itoa(len(lines)-1)), last[bytes.IndexByte(last, ','):]...)
		tail = tail[:1+rng.IntN(len(tail)-1)]
	}
	f, err := os.OpenFile(path, os.O_WRONLY|os.O_APPEND, 0)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	if _, err := f.Write(tail); err != nil {
		t.Fatal(err)
	}
	return true
}

func waitEnd(t *testing.T, c *client.Client, id string) client.Scan {
	t.Helper()
	ctx, cancel := context.WithTimeout(context.Background(), 60*time.Second)
	defer cancel()
	st, err := c.Watch(ctx, id, 0)
	if err != nil {
		t.Fatal(err)
	}
	var last client.Scan
	for ev := range st.C {
		if ev.Scan != nil {
			last = *ev.Scan
		}
	}
	if err := st.Err(); err != nil {
		t.Fatalf("watch %s: %v", id, err)
	}
	return last
}
