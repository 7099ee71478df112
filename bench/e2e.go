package main

import (
	"bufio"
	"bytes"
	"context"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"time"

	"goniod/client"
	goniodv1 "goniod/proto/goniod/v1"
)

// runScan submits a scan and waits for it to be done.
func runScan(ctx context.Context, c *client.Client, req client.ScanRequest) (client.Scan, error) {
	s, err := c.Submit(ctx, req)
	if err != nil {
		return s, err
	}
	return waitDone(ctx, c, s.ID)
}

// waitDone polls a scan until it has ended; anything but done is an error.
func waitDone(ctx context.Context, c *client.Client, id string) (client.Scan, error) {
	for {
		s, err := c.Scan(ctx, id)
		if err != nil {
			return s, err
		}
		if s.State.Terminal() {
			if s.State != client.Done {
				return s, fmt.Errorf("scan %s ended %s: %s", id, s.State, s.Reason)
			}
			return s, nil
		}
		select {
		case <-ctx.Done():
			return s, ctx.Err()
		case <-time.After(20 * time.Millisecond):
		}
	}
}

// zeroDwell is a timed scan of n points at the simulator's speed, the fastest points goniod can take, on the
// first-order Cu Kα reflection at 30 kV / 0.8 mA (the demo scenario), so that every column holds a real value.
func zeroDwell(n int) client.ScanRequest {
	return client.ScanRequest{Kind: client.Timed, Points: n, Dwell: time.Millisecond, At: map[string]float64{"theta": 22.5, "twotheta": 45},
		Source: &client.Source{KV: 30, MA: 0.8}, Label: "bench"}
}

// lengthRun is what storing and serving one scan length measured.
type lengthRun struct {
	Points    int
	ID        string
	Acquire   time.Duration // submit to done, with one live watcher
	Memory    memory        // the daemon after storing and serving the scan
	Fetch     fetchFigures
	Streaming streamComparison
}

// storeAndServe runs a zero-dwell scan of n points with one live watcher, fetches it with gonio, streams it
// against the bare server, and reads the daemon's memory afterwards.
func storeAndServe(ctx context.Context, d *daemon, gonio, dir string, n int, bareOf func(id string) (*bareProcess, error)) (lengthRun, error) {
	r := lengthRun{Points: n}
	scans := goniodv1.NewScansClient(d.Client.Conn())
	t0 := time.Now()
	s, err := d.Client.Submit(ctx, zeroDwell(n))
	if err != nil {
		return r, err
	}
	r.ID = s.ID
	watched := make(chan error, 1)
	go func() {
		watched <- follow(ctx, scans, s.ID, n, nil, nil)
	}()
	if _, err := waitDone(ctx, d.Client, s.ID); err != nil {
		return r, err
	}
	r.Acquire = time.Since(t0)
	if err := <-watched; err != nil {
		return r, err
	}
	if r.Fetch, err = fetchWithGonio(ctx, gonio, d, s.ID, n, dir); err != nil {
		return r, err
	}
	bare, err := bareOf(s.ID)
	if err != nil {
		return r, err
	}
	rounds := 3
	if n <= 100_000 {
		rounds = 5
	}
	if r.Streaming, err = compareStreaming(ctx, d, bare, s.ID, n, rounds); err != nil {
		return r, err
	}
	r.Memory, err = readMemory(d.cmd.Process.Pid)
	return r, err
}

// fetchFigures: gonio fetch of a whole scan to a CSV file, and reading that file back, in points per second.
type fetchFigures struct {
	Gonio, RawRead float64
	Bytes          int64
	SameAsStore    bool // the fetched CSV is byte for byte the daemon's points file
}

func fetchWithGonio(ctx context.Context, gonio string, d *daemon, id string, n int, dir string) (fetchFigures, error) {
	var f fetchFigures
	out := filepath.Join(dir, id+".csv")
	defer os.Remove(out)
	t0 := time.Now()
	cmd := exec.CommandContext(ctx, gonio, "--addr", d.Addr, "fetch", id, "-o", out)
	if b, err := cmd.CombinedOutput(); err != nil {
		return f, fmt.Errorf("gonio fetch: %w\n%s", err, b)
	}
	f.Gonio = float64(n) / time.Since(t0).Seconds()
	for range 3 {
		t0 := time.Now()
		size, err := readFile(out)
		if err != nil {
			return f, err
		}
		f.RawRead, f.Bytes = max(f.RawRead, float64(n)/time.Since(t0).Seconds()), size
	}
	same, err := sameFiles(out, filepath.Join(d.Data, "scans", id, "points.csv"))
	f.SameAsStore = same && err == nil
	return f, nil
}

// readFile reads a file to its end, as a program that reads a CSV would at least have to, and returns its size.
func readFile(path string) (int64, error) {
	f, err := os.Open(path)
	if err != nil {
		return 0, err
	}
	defer f.Close()
	return io.CopyBuffer(io.Discard, f, make([]byte, 1<<16))
}

// sameFiles compares two files byte for byte.
func sameFiles(a, b string) (bool, error) {
	fa, err := os.Open(a)
	if err != nil {
		return false, err
	}
	defer fa.Close()
	fb, err := os.Open(b)
	if err != nil {
		return false, err
	}
	defer fb.Close()
	ra, rb := bufio.NewReaderSize(fa, 1<<16), bufio.NewReaderSize(fb, 1<<16)
	ba, bb := make([]byte, 1<<16), make([]byte, 1<<16)
	for {
		na, erra := io.ReadFull(ra, ba)
		nb, errb := io.ReadFull(rb, bb)
		if na != nb || !bytes.Equal(ba[:na], bb[:nb]) {
			return false, nil
		}
		if errors.Is(erra, io.EOF) || errors.Is(erra, io.ErrUnexpectedEOF) {
			return errors.Is(errb, io.EOF) || errors.Is(errb, io.ErrUnexpectedEOF), nil
		}
		if erra != nil {
			return false, erra
		}
		if errb != nil {
			return false, errb
		}
	}
}

// analysisFigures: the full analysis of a stored scan on the daemon (one lattice-fit call: peak search and
// fits, line identification, the fit of d) and a fetch of the same scan, median times.
type analysisFigures struct {
	Points          int
	Analysis, Fetch time.Duration
	ServerCPU       time.Duration // the daemon's processor time per analysis call (mean), reading the scan included
	DNM             float64
	Reflections     int
}

// lifD200 is the (200) spacing of LiF, nm: Wyckoff, Crystal Structures (1965), as carried by xraylib's
// Crystals.dat. The analysis must find it, or its timing means nothing.
const lifD200 = 0.201315

func analyse(ctx context.Context, d *daemon, rounds int) (analysisFigures, error) {
	var a analysisFigures
	// The demo scenario's coupled scan, θ 10°–55° at 30 kV / 0.8 mA, in 10,000 steps.
	s, err := runScan(ctx, d.Client, client.ScanRequest{Kind: client.Coupled, From: 10, To: 55, Step: 45.0 / 9999,
		Dwell: time.Second, Source: &client.Source{KV: 30, MA: 0.8}, Label: "bench analysis"})
	if err != nil {
		return a, err
	}
	a.Points = s.PointsDone
	var analysis, fetch []time.Duration
	var cpu time.Duration
	for range rounds {
		c0, err := processCPU(d.cmd.Process.Pid)
		if err != nil {
			return a, err
		}
		t0 := time.Now()
		lat, err := d.Client.FitLattice(ctx, []string{s.ID}, nil, client.LatticeOptions{})
		if err != nil {
			return a, err
		}
		analysis = append(analysis, time.Since(t0))
		c1, err := processCPU(d.cmd.Process.Pid)
		if err != nil {
			return a, err
		}
		cpu += c1 - c0
		a.DNM, a.Reflections = lat.DNM.Value, len(lat.Used)
		if math.Abs(a.DNM/lifD200-1) > 0.005 || a.Reflections < 4 {
			return a, fmt.Errorf("the analysis found d = %g nm from %d reflections; LiF(200) is %g nm", a.DNM, a.Reflections, lifD200)
		}
		t0 = time.Now()
		if _, err := d.Client.Fetch(ctx, s.ID, client.CSV, io.Discard); err != nil {
			return a, err
		}
		fetch = append(fetch, time.Since(t0))
	}
	a.Analysis, a.Fetch, a.ServerCPU = median(analysis), median(fetch), cpu/time.Duration(rounds)
	return a, nil
}

// median of durations.
func median(ds []time.Duration) time.Duration { return quantile(ds, 0.5) }
