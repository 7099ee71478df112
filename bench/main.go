// Command bench measures goniod against the limits of the machine it runs on and prints one table: every
// figure beside a baseline measured in the same run, their ratio, and the aim. It runs the packages' own
// benchmarks (go test -bench) and the end-to-end ones against goniod processes it builds and starts on the
// simulator, on loopback, in a temporary directory.
//
//	go run ./bench               # the table (a few minutes)
//	go run ./bench -soak 60s     # and the load soak: 1,000 watchers, 20 submitters, 20 pollers
//
// Run it from the module's directory on an otherwise quiet machine; the table says how busy it was.
package main

import (
	"context"
	"flag"
	"fmt"
	"os"
	"os/exec"
	"os/signal"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"syscall"
	"time"

	goniodv1 "goniod/proto/goniod/v1"
)

// config is what the command line chooses.
type config struct {
	root, dir string
	only      map[string]bool // sections to run (empty: all)
	quick     bool
	lengths   []int
	soak      soakOptions
}

// sections, in the order they run.
var sections = []string{"serial", "acquisition", "analysis", "daemon", "fanout"}

func main() {
	var (
		bareFile   = flag.String("bare-server", "", "internal: serve the points of this file as a bare gRPC server")
		only       = flag.String("only", "", "comma-separated sections to run: "+strings.Join(sections, ", ")+" (default: all; -only soak with -soak: the soak alone)")
		quick      = flag.Bool("quick", false, "smaller sizes: a quick check that the bench works, not figures to quote")
		soakFor    = flag.Duration("soak", 0, "run the load soak for this long after the table (e.g. 60s; 0: no soak)")
		watchers   = flag.Int("soak-watchers", 1000, "soak: watch streams")
		submitters = flag.Int("soak-submitters", 20, "soak: clients submitting and cancelling scans")
		pollers    = flag.Int("soak-pollers", 20, "soak: clients polling state")
		keep       = flag.Bool("keep", false, "keep the temporary directory (binaries, data directories)")
	)
	flag.Parse()
	if *bareFile != "" {
		if err := serveBare(*bareFile); err != nil {
			fmt.Fprintln(os.Stderr, "bare server:", err)
			os.Exit(1)
		}
		return
	}
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt, syscall.SIGTERM)
	defer stop()
	// The soak's daemon runs the simulator at speed 1e4 (see runSoak): its scans of 20 to 200 points take 5 ms a
	// point; 20 watchers share a connection.
	cfg := config{only: map[string]bool{}, quick: *quick, lengths: []int{100_000, 1_000_000},
		soak: soakOptions{Duration: *soakFor, Watchers: *watchers, Submitters: *submitters, Pollers: *pollers,
			WatchConns: max(1, *watchers/20), SimDwell: 50 * time.Second, MaxPoints: 200, Sample: time.Second}}
	if cfg.quick {
		cfg.lengths = []int{10_000, 100_000}
	}
	for _, s := range strings.Split(*only, ",") {
		if s = strings.TrimSpace(s); s != "" {
			if s != "soak" && !slices.Contains(sections, s) {
				fail(fmt.Errorf("-only %s: the sections are %s, and soak", s, strings.Join(sections, ", ")))
			}
			cfg.only[s] = true
		}
	}
	var err error
	if cfg.root, err = moduleRoot(ctx); err != nil {
		fail(err)
	}
	if cfg.dir, err = os.MkdirTemp("", "goniod-bench-"); err != nil {
		fail(err)
	}
	if !*keep {
		defer os.RemoveAll(cfg.dir)
	} else {
		fmt.Fprintln(os.Stderr, "keeping", cfg.dir)
	}
	r := run(ctx, cfg)
	printReport(os.Stdout, r, cfg)
	if len(r.errs) > 0 {
		stop()
		if !*keep {
			os.RemoveAll(cfg.dir)
		}
		os.Exit(1)
	}
}

func fail(err error) {
	fmt.Fprintln(os.Stderr, "bench:", err)
	os.Exit(1)
}

// moduleRoot is the directory of the go.mod the bench belongs to.
func moduleRoot(ctx context.Context) (string, error) {
	out, err := exec.CommandContext(ctx, "go", "env", "GOMOD").Output()
	if err != nil {
		return "", fmt.Errorf("go env GOMOD: %w", err)
	}
	mod := strings.TrimSpace(string(out))
	if mod == "" || mod == os.DevNull {
		return "", fmt.Errorf("not inside the goniod module: run the bench from its directory")
	}
	return filepath.Dir(mod), nil
}

func progress(msg string) { fmt.Fprintf(os.Stderr, "%s  %s\n", time.Now().Format("15:04:05"), msg) }

// results are everything measured, and what went wrong.
type results struct {
	machine     machine
	serial      map[string]benchResult
	store       map[string]benchResult
	acquisition map[string]benchResult
	realTime    map[string]benchResult
	analysisPkg map[string]benchResult
	idle        memory
	lengths     []lengthRun
	analysis    *analysisFigures
	fanOut      *fanOutFigures
	soak        *soakResult
	soakGrowth  float64
	soakPerScan int64 // bytes of resident set per scan submitted during the soak
	started     time.Time
	took        time.Duration
	errs        []error
}

func (r *results) fail(section string, err error) {
	err = fmt.Errorf("%s: %w", section, err)
	progress(err.Error())
	r.errs = append(r.errs, err)
}

func run(ctx context.Context, cfg config) *results {
	r := &results{started: time.Now()}
	r.machine = describeMachine(ctx, cfg.root, cfg.dir)
	want := func(s string) bool { return len(cfg.only) == 0 || cfg.only[s] }
	benchtime := func(full, quick string) string {
		if cfg.quick {
			return quick
		}
		return full
	}
	gobench := func(section, pkg, pattern, bt string) map[string]benchResult {
		progress(fmt.Sprintf("go test -bench %s %s", pattern, pkg))
		res, err := goBench(ctx, cfg.root, pkg, pattern, bt)
		if err != nil {
			r.fail(section, err)
		}
		return res
	}
	if want("serial") {
		r.serial = gobench("serial", "./driver/serial/", "BenchmarkPoint$", benchtime("3s", "0.5s"))
	}
	if want("acquisition") {
		r.store = gobench("acquisition", "./daemon/store/", "BenchmarkAppend$", benchtime("2s", "0.3s"))
		r.acquisition = gobench("acquisition", "./daemon/engine/", "BenchmarkAcquisitionWithWatchers/dwell=zero",
			benchtime("20000x", "3000x"))
		r.realTime = gobench("acquisition", "./daemon/engine/", "BenchmarkAcquisitionWithWatchers/dwell=20ms/watchers=1000$",
			benchtime("250x", "50x"))
	}
	if want("analysis") {
		r.analysisPkg = gobench("analysis", "./xray/analysis/", "BenchmarkFullAnalysis$", benchtime("2s", "0.3s"))
	}
	needDaemon := want("daemon") || want("fanout") || want("analysis")
	if needDaemon || cfg.soak.Duration > 0 {
		progress("building goniod and gonio")
		bins, err := build(ctx, cfg.root, cfg.dir, "goniod", "gonio")
		switch {
		case err != nil:
			r.fail("build", err)
		case needDaemon:
			daemonSections(ctx, cfg, bins, r, want)
		}
		if err == nil && cfg.soak.Duration > 0 {
			runSoak(ctx, cfg, bins["goniod"], r)
		}
	}
	r.machine.LoadEnd = loadAverage()
	r.took = time.Since(r.started)
	return r
}

// daemonSections run the end-to-end measurements on a goniod process.
func daemonSections(ctx context.Context, cfg config, bins map[string]string, r *results, want func(string) bool) {
	// The simulator runs 10,000 times faster than real time: a 1 ms dwell takes 0.1 µs, a 200 s dwell 20 ms.
	const speed = 1e4
	d, err := startDaemon(bins["goniod"], cfg.dir, speed)
	if err != nil {
		r.fail("start goniod", err)
		return
	}
	defer func() {
		if err := d.stop(); err != nil {
			r.fail("stop goniod", err)
		}
	}()
	// The bare gRPC server starts on the points of the first scan that needs it.
	var bare *bareProcess
	bareOf := func(id string) (*bareProcess, error) {
		if bare != nil {
			return bare, nil
		}
		b, err := startBare(ctx, goniodv1.NewScansClient(d.Client.Conn()), id, cfg.dir, 100_000)
		bare = b
		return b, err
	}
	defer func() {
		if bare != nil {
			if err := bare.stop(); err != nil {
				r.fail("bare server", err)
			}
		}
	}()
	if want("daemon") {
		time.Sleep(2 * time.Second) // let the start-up settle before the idle reading
		if r.idle, err = readMemory(d.cmd.Process.Pid); err != nil {
			r.fail("memory", err)
		}
		for _, n := range cfg.lengths {
			progress(fmt.Sprintf("store and serve a %d-point scan (live watcher, gonio fetch, streaming vs bare gRPC)", n))
			l, err := storeAndServe(ctx, d, bins["gonio"], cfg.dir, n, bareOf)
			if err != nil {
				r.fail(fmt.Sprintf("%d-point scan", n), err)
				break
			}
			r.lengths = append(r.lengths, l)
		}
	}
	if want("analysis") {
		progress("full analysis of a 10,000-point coupled scan on the daemon")
		a, err := analyse(ctx, d, 15)
		if err != nil {
			r.fail("analysis", err)
		} else {
			r.analysis = &a
		}
	}
	if want("fanout") {
		points := 500
		if cfg.quick {
			points = 100
		}
		progress(fmt.Sprintf("fan-out to 1,000 gRPC watchers, %d points at 20 ms, goniod and the bare server", points))
		f, err := compareFanOut(ctx, d, bareOf, 1000, 50, points, 20*time.Millisecond*speed, 20*time.Millisecond)
		if err != nil {
			r.fail("fan-out", err)
		} else {
			r.fanOut = &f
		}
	}
}

// runSoak runs the load soak on a goniod of its own.
func runSoak(ctx context.Context, cfg config, goniod string, r *results) {
	d, err := startDaemon(goniod, cfg.dir, 1e4)
	if err != nil {
		r.fail("soak", err)
		return
	}
	progress(fmt.Sprintf("load soak for %v: %d watchers, %d submitters, %d pollers", cfg.soak.Duration,
		cfg.soak.Watchers, cfg.soak.Submitters, cfg.soak.Pollers))
	s, err := soak(ctx, soakTarget{Addr: d.Addr, MetricsAddr: d.MetricsAddr, PID: d.cmd.Process.Pid}, cfg.soak, progress)
	if err != nil {
		r.fail("soak", err)
	} else {
		r.soak = s
		r.soakGrowth, r.soakPerScan = memoryGrowth(s.Memory, s.ScansAt)
		if s.Errors > 0 || s.Lost > 0 {
			r.fail("soak", fmt.Errorf("%d errors, %d lost points; the first: %s", s.Errors, s.Lost, strings.Join(s.FirstErrors[:min(3, len(s.FirstErrors))], "; ")))
		}
	}
	if err := d.stop(); err != nil {
		r.fail("soak", err)
	}
}

// memoryGrowth compares the median resident set of the last quarter of the readings with that of the second
// quarter (the first is warm-up): 1 means flat. perScan is the growth between the two medians per scan
// submitted meanwhile (each scan's record stays in the daemon's memory).
func memoryGrowth(ms []memory, scansAt []int) (ratio float64, perScan int64) {
	q := len(ms) / 4
	if q == 0 || len(scansAt) != len(ms) {
		return 0, 0
	}
	early, late := quarterMedians(ms)
	if scans := scansAt[len(ms)-1-q/2] - scansAt[q+q/2]; scans > 0 {
		perScan = (late - early) / int64(scans)
	}
	return float64(late) / float64(early), perScan
}

// quarterMedians returns the median resident set of the second quarter of the readings and of the last.
func quarterMedians(ms []memory) (early, late int64) {
	q := len(ms) / 4
	med := func(part []memory) int64 {
		ds := make([]time.Duration, len(part))
		for i, m := range part {
			ds[i] = time.Duration(m.RSS)
		}
		return int64(median(ds))
	}
	return med(ms[q : 2*q]), med(ms[len(ms)-q:])
}

func mib(b int64) string { return strconv.FormatFloat(float64(b)/(1<<20), 'f', 1, 64) + " MiB" }
