//go:build !windows

package main

import (
	"bytes"
	"context"
	"fmt"
	"io"
	"log/slog"
	"net"
	"os"
	"path/filepath"
	"strings"
	"sync"
	"syscall"
	"testing"
	"time"

	"goniod/client"
	"goniod/daemon/scan"
	"goniod/daemon/store"
)

type lockedBuffer struct {
	mu sync.Mutex
	b  bytes.Buffer
}

func (l *lockedBuffer) Write(p []byte) (int, error) {
	l.mu.Lock()
	defer l.mu.Unlock()
	return l.b.Write(p)
}

func (l *lockedBuffer) String() string {
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

// TestSIGTERMStopsBetweenPoints sends SIGTERM to the running daemon (run, as main calls it) during a point of a
// scan with high voltage on. With time to spare the point in progress is finished and stored; with a short
// shutdown timeout it is cut short. Either way the scan is interrupted with every finished point stored, high
// voltage goes off, and the daemon exits 0 within the bound.
func TestSIGTERMStopsBetweenPoints(t *testing.T) {
	cases := []struct {
		name        string
		timeout     time.Duration
		dwell       time.Duration
		first       int // points to wait for before the signal
		extraPoints int // points stored after the signal
		exitWithin  time.Duration
	}{
		{"point finishes", 20 * time.Second, 1500 * time.Millisecond, 1, 1, 10 * time.Second},
		{"point cut short", 300 * time.Millisecond, 10 * time.Second, 0, 0, 5 * time.Second},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			dir := t.TempDir()
			cfgPath := filepath.Join(dir, "goniod.yaml")
			cfg := fmt.Sprintf("driver: sim\ndrivers:\n  sim:\n    speed: 1\n    seed: 3\nsafety:\n  shutdown_timeout: %s\n", c.timeout)
			if err := os.WriteFile(cfgPath, []byte(cfg), 0o600); err != nil {
				t.Fatal(err)
			}
			addr := freeAddr(t)
			logs := &lockedBuffer{}
			exit := make(chan int, 1)
			go func() {
				exit <- run([]string{"--config", cfgPath, "--listen", addr, "--metrics-listen", freeAddr(t),
					"--data", filepath.Join(dir, "data")}, logs)
			}()
			cl, err := client.New(addr)
			if err != nil {
				t.Fatal(err)
			}
			defer cl.Close()
			waitServing(t, cl, exit, logs)
			s, err := cl.Submit(context.Background(), client.ScanRequest{Kind: client.Timed, Points: 50, Dwell: c.dwell,
				Source: &client.Source{KV: 30, MA: 0.8}})
			if err != nil {
				t.Fatal(err)
			}
			before := waitPoints(t, cl, s.ID, c.first)
			time.Sleep(300 * time.Millisecond) // into the next point
			sent := time.Now()
			if err := syscall.Kill(os.Getpid(), syscall.SIGTERM); err != nil {
				t.Fatal(err)
			}
			select {
			case code := <-exit:
				if code != 0 {
					t.Fatalf("exit code %d\n%s", code, logs)
				}
			case <-time.After(c.exitWithin):
				t.Fatalf("goniod did not exit within %v of SIGTERM\n%s", c.exitWithin, logs)
			}
			took := time.Since(sent)
			rec, stored := readScan(t, filepath.Join(dir, "data"), s.ID)
			if rec.State != scan.Interrupted || !strings.Contains(rec.Reason, "resume") {
				t.Errorf("scan is %s (%s), want interrupted and resumable", rec.State, rec.Reason)
			}
			if stored != before+c.extraPoints || rec.PointsDone != stored {
				t.Errorf("%d points stored (record says %d), want %d: %d before the signal and %d after",
					stored, rec.PointsDone, before+c.extraPoints, before, c.extraPoints)
			}
			for _, want := range []string{"shutting down", "high voltage off at shutdown", "scan=" + s.ID} {
				if !strings.Contains(logs.String(), want) {
					t.Errorf("log lacks %q:\n%s", want, logs)
				}
			}
			t.Logf("exited %v after SIGTERM with %d points stored", took.Round(time.Millisecond), stored)
		})
	}
}

func waitServing(t *testing.T, cl *client.Client, exit chan int, logs *lockedBuffer) {
	t.Helper()
	deadline := time.Now().Add(30 * time.Second)
	for {
		select {
		case code := <-exit:
			t.Fatalf("goniod exited with %d at start:\n%s", code, logs)
		default:
		}
		if _, err := cl.State(context.Background()); err == nil {
			return
		}
		if time.Now().After(deadline) {
			t.Fatalf("goniod not serving after 30 s:\n%s", logs)
		}
		time.Sleep(20 * time.Millisecond)
	}
}

// waitPoints waits for at least n points of a scan and returns how many there are.
func waitPoints(t *testing.T, cl *client.Client, id string, n int) int {
	t.Helper()
	deadline := time.Now().Add(30 * time.Second)
	for {
		s, err := cl.Scan(context.Background(), id)
		if err != nil {
			t.Fatal(err)
		}
		if s.PointsDone >= n {
			return s.PointsDone
		}
		if time.Now().After(deadline) {
			t.Fatalf("scan %s has %d points after 30 s (%s %s)", id, s.PointsDone, s.State, s.Reason)
		}
		time.Sleep(10 * time.Millisecond)
	}
}

// readScan reads a scan's record and counts its stored points, as a restarted daemon would.
func readScan(t *testing.T, data, id string) (*scan.Record, int) {
	t.Helper()
	st, err := store.Open(data, slog.New(slog.NewTextHandler(io.Discard, nil)))
	if err != nil {
		t.Fatal(err)
	}
	defer st.Close()
	recs, err := st.LoadRecords()
	if err != nil {
		t.Fatal(err)
	}
	for _, r := range recs {
		if r.ID == id {
			n, err := st.CountPoints(id)
			if err != nil {
				t.Fatal(err)
			}
			return r, n
		}
	}
	t.Fatalf("scan %s not in the store", id)
	return nil, 0
}
