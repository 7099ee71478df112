package main

import (
	"bufio"
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"net/http"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"sync"
	"time"

	"goniod/client"
)

// build compiles the named commands of the module into dir and returns their paths by name.
func build(ctx context.Context, root, dir string, names ...string) (map[string]string, error) {
	paths := map[string]string{}
	for _, n := range names {
		out := filepath.Join(dir, n)
		cmd := exec.CommandContext(ctx, "go", "build", "-o", out, "./cmd/"+n)
		cmd.Dir = root
		if b, err := cmd.CombinedOutput(); err != nil {
			return nil, fmt.Errorf("go build ./cmd/%s: %w\n%s", n, err, b)
		}
		paths[n] = out
	}
	return paths, nil
}

// daemon is a goniod process on the simulator, listening on loopback ports it chose itself.
type daemon struct {
	cmd         *exec.Cmd
	Addr        string
	MetricsAddr string
	Data        string
	Client      *client.Client
	log         *tail
	exited      chan error
}

// startDaemon runs goniod with the simulator at speed (simulated seconds per wall second) on a new data
// directory under dir, and waits until it serves.
func startDaemon(bin, dir string, speed float64, extra ...string) (*daemon, error) {
	data, err := os.MkdirTemp(dir, "data-")
	if err != nil {
		return nil, err
	}
	args := append([]string{"--sim", "--sim-seed", "1", "--sim-speed", strconv.FormatFloat(speed, 'g', -1, 64),
		"--listen", "127.0.0.1:0", "--metrics-listen", "127.0.0.1:0", "--data", data, "--log-format", "json"}, extra...)
	cmd := exec.Command(bin, args...)
	stderr, err := cmd.StderrPipe()
	if err != nil {
		return nil, err
	}
	if err := cmd.Start(); err != nil {
		return nil, err
	}
	d := &daemon{cmd: cmd, Data: data, log: &tail{max: 64 << 10}, exited: make(chan error, 1)}
	addr := make(chan [2]string, 1)
	go d.readLog(stderr, addr)
	go func() { d.exited <- cmd.Wait() }()
	select {
	case a := <-addr:
		d.Addr, d.MetricsAddr = a[0], a[1]
	case err := <-d.exited:
		return nil, fmt.Errorf("goniod exited before serving (%v):\n%s", err, d.log)
	case <-time.After(30 * time.Second):
		d.kill()
		return nil, fmt.Errorf("goniod not serving after 30 s:\n%s", d.log)
	}
	if d.Client, err = client.New(d.Addr, client.WithTimeout(time.Minute)); err != nil {
		d.kill()
		return nil, err
	}
	return d, nil
}

// readLog keeps the end of the daemon's log and reports the gRPC and metrics addresses from its "serving"
// line.
func (d *daemon) readLog(r io.Reader, addr chan<- [2]string) {
	sc := bufio.NewScanner(r)
	sc.Buffer(make([]byte, 64<<10), 1<<20)
	for sc.Scan() {
		line := sc.Bytes()
		d.log.Write(append(line, '\n'))
		var entry struct {
			Msg     string `json:"msg"`
			Listen  string `json:"listen"`
			Metrics string `json:"metrics"`
		}
		if json.Unmarshal(line, &entry) == nil && entry.Msg == "goniod serving" && entry.Listen != "" {
			select {
			case addr <- [2]string{entry.Listen, entry.Metrics}:
			default:
			}
		}
	}
}

// stop ends the daemon with SIGINT, as an operator would, and waits for it.
func (d *daemon) stop() error {
	d.Client.Close()
	if err := d.cmd.Process.Signal(os.Interrupt); err != nil {
		return err
	}
	select {
	case err := <-d.exited:
		if err != nil {
			return fmt.Errorf("goniod stopped with %v:\n%s", err, d.log)
		}
		return nil
	case <-time.After(30 * time.Second):
		d.kill()
		return errors.New("goniod did not stop within 30 s of SIGINT")
	}
}

func (d *daemon) kill() { _ = d.cmd.Process.Kill() }

// memory is a process's resident set now and its peak, in bytes.
type memory struct{ RSS, Peak int64 }

// readMemory reads a process's resident set size and its high-water mark from /proc.
func readMemory(pid int) (memory, error) {
	b, err := os.ReadFile(fmt.Sprintf("/proc/%d/status", pid))
	if err != nil {
		return memory{}, err
	}
	return parseMemory(string(b))
}

// parseMemory reads VmRSS and VmHWM (kB) from the text of /proc/PID/status.
func parseMemory(status string) (memory, error) {
	var m memory
	var seen int
	for _, line := range strings.Split(status, "\n") {
		key, val, ok := strings.Cut(line, ":")
		if !ok || (key != "VmRSS" && key != "VmHWM") {
			continue
		}
		f := strings.Fields(val)
		if len(f) != 2 || f[1] != "kB" {
			return m, fmt.Errorf("%s: unexpected value %q", key, val)
		}
		kb, err := strconv.ParseInt(f[0], 10, 64)
		if err != nil {
			return m, fmt.Errorf("%s: %w", key, err)
		}
		if key == "VmRSS" {
			m.RSS = kb << 10
		} else {
			m.Peak = kb << 10
		}
		seen++
	}
	if seen != 2 {
		return m, errors.New("no VmRSS and VmHWM in the process status")
	}
	return m, nil
}

// tail keeps the last max bytes written to it.
type tail struct {
	mu  sync.Mutex
	max int
	b   []byte
}

func (t *tail) Write(p []byte) (int, error) {
	t.mu.Lock()
	defer t.mu.Unlock()
	t.b = append(t.b, p...)
	if over := len(t.b) - t.max; over > 0 {
		t.b = append(t.b[:0], t.b[over:]...)
	}
	return len(p), nil
}

func (t *tail) String() string {
	t.mu.Lock()
	defer t.mu.Unlock()
	return string(t.b)
}

// processCPU is the processor time (user and system) a process has used, from /proc/PID/stat.
func processCPU(pid int) (time.Duration, error) {
	b, err := os.ReadFile(fmt.Sprintf("/proc/%d/stat", pid))
	if err != nil {
		return 0, err
	}
	return parseCPU(string(b))
}

// clockTick is the unit of the times in /proc/PID/stat (USER_HZ, 100 on Linux for every architecture Go runs
// on).
const clockTick = 10 * time.Millisecond

// parseCPU reads utime and stime (fields 14 and 15) from the text of /proc/PID/stat; the command name, field
// 2, is in parentheses and may hold spaces.
func parseCPU(stat string) (time.Duration, error) {
	i := strings.LastIndexByte(stat, ')')
	if i < 0 {
		return 0, errors.New("process stat: no command name")
	}
	f := strings.Fields(stat[i+1:]) // from field 3 on
	if len(f) < 13 {
		return 0, errors.New("process stat: too few fields")
	}
	var ticks int64
	for _, s := range f[11:13] {
		n, err := strconv.ParseInt(s, 10, 64)
		if err != nil {
			return 0, fmt.Errorf("process stat: %w", err)
		}
		ticks += n
	}
	return time.Duration(ticks) * clockTick, nil
}

// goroutines reads go_goroutines from the daemon's metrics endpoint.
func goroutines(ctx context.Context, metricsAddr string) (int, error) {
	req, err := http.NewRequestWithContext(ctx, http.MethodGet, "http://"+metricsAddr+"/metrics", nil)
	if err != nil {
		return 0, err
	}
	resp, err := http.DefaultClient.Do(req)
	if err != nil {
		return 0, err
	}
	defer resp.Body.Close()
	b, err := io.ReadAll(resp.Body)
	if err != nil {
		return 0, err
	}
	return parseGoroutines(string(b))
}

// parseGoroutines finds the go_goroutines sample in Prometheus exposition text.
func parseGoroutines(exposition string) (int, error) {
	for _, line := range strings.Split(exposition, "\n") {
		if v, ok := strings.CutPrefix(line, "go_goroutines "); ok {
			f, err := strconv.ParseFloat(strings.TrimSpace(v), 64)
			return int(f), err
		}
	}
	return 0, errors.New("no go_goroutines in the metrics")
}
