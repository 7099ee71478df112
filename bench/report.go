package main

import (
	"fmt"
	"io"
	"strconv"
	"strings"
	"time"
)

// row is one line of the table: a figure of goniod, the baseline measured in the same run, their ratio, the
// aim and whether the figure meets it.
type row struct {
	section, figure, value, baseline, ratio, aim, met string
}

// table collects rows; a row whose figures are missing says why instead.
type table struct{ rows []row }

func (t *table) add(r row) { t.rows = append(t.rows, r) }

func (t *table) missing(section, figure string, err error) {
	t.add(row{section: section, figure: figure, value: "not measured: " + err.Error()})
}

// write prints the table as Markdown.
func (t *table) write(w io.Writer) {
	fmt.Fprintln(w, "| # | Figure | goniod | Baseline (same run) | Ratio | Aim | Met |")
	fmt.Fprintln(w, "|---|---|---|---|---|---|---|")
	for _, r := range t.rows {
		cells := []string{r.section, r.figure, r.value, r.baseline, r.ratio, r.aim, r.met}
		for i, c := range cells {
			if c == "" {
				cells[i] = "—"
			}
			cells[i] = strings.ReplaceAll(cells[i], "|", "/")
		}
		fmt.Fprintf(w, "| %s |\n", strings.Join(cells, " | "))
	}
}

func printReport(w io.Writer, r *results, cfg config) {
	m := r.machine
	fmt.Fprintf(w, "goniod bench, %s, took %v%s\n\n", r.started.UTC().Format("2006-01-02 15:04 MST"), r.took.Round(time.Second),
		map[bool]string{true: " (-quick: sizes too small to quote)", false: ""}[cfg.quick])
	fmt.Fprintf(w, "- Machine: %d CPUs (nproc), %s; %s; disk: %s\n", m.CPUs, m.CPU, m.Kernel, m.Disk)
	fmt.Fprintf(w, "- %s\n", m.Go)
	fmt.Fprintf(w, "- Load average (1, 5, 15 min) before: %s; after: %s\n\n", m.LoadBefore, m.LoadEnd)
	t := &table{}
	pointTime := serialRows(t, r)
	acquisitionRows(t, r, pointTime)
	streamingRows(t, r)
	fanOutRows(t, r, pointTime)
	memoryRows(t, r)
	fetchRows(t, r)
	analysisRows(t, r)
	soakRows(t, r)
	t.write(w)
	if len(r.errs) > 0 {
		fmt.Fprintln(w, "\nErrors:")
		for _, err := range r.errs {
			fmt.Fprintf(w, "- %v\n", err)
		}
	}
}

// serialRows: the serial path per point against the wire time of its bytes. It returns the time of one point
// at 115200 baud, the shortest point of a real instrument on a serial line, which other rows compare with.
func serialRows(t *table, r *results) time.Duration {
	if r.serial == nil {
		return 0
	}
	var at115200 time.Duration
	for _, c := range []struct{ name, label string }{
		{"unpaced", "Serial path per point, zero dwell, pty unpaced (wire time at 115200 baud)"},
		{"paced-115200", "Serial path per point, zero dwell, line paced at 115200 baud"},
		{"paced-9600", "Serial path per point, zero dwell, line paced at 9600 baud"},
	} {
		name := "BenchmarkPoint/" + c.name
		ns, err1 := metric(r.serial, name, "ns/op")
		wire, err2 := metric(r.serial, name, "wire-µs/point")
		bytes, err3 := metric(r.serial, name, "bytes/point")
		if err := firstErr(err1, err2, err3); err != nil {
			t.missing("1", c.label, err)
			continue
		}
		if c.name == "paced-115200" {
			at115200 = time.Duration(ns)
		}
		x := ns / 1e3 / wire
		t.add(row{section: "1", figure: c.label, value: dur(time.Duration(ns)),
			baseline: fmt.Sprintf("wire time of its %.0f bytes: %s", bytes, dur(time.Duration(wire*1e3))),
			ratio:    times(x), aim: "≤ 1.3", met: yes(x <= 1.3)})
	}
	return at115200
}

func acquisitionRows(t *table, r *results, pointTime time.Duration) {
	if r.acquisition == nil || r.store == nil {
		return
	}
	one, err1 := metric(r.store, "BenchmarkAppend/batch=1", "points/s")
	fsync, err2 := metric(r.store, "BenchmarkAppend/batch=1", "fsync-µs")
	best, err3 := metric(r.store, "BenchmarkAppend/batch=1024", "points/s")
	if err := firstErr(err1, err2, err3); err != nil {
		t.missing("2", "Store baselines", err)
		return
	}
	base := fmt.Sprintf("store alone, one fsync per point (%s each): %s points/s", dur(time.Duration(fsync*1e3)), count(one))
	for _, w := range []int{1, 100, 1000} {
		label := fmt.Sprintf("Durable points/s, zero dwell, %s watcher%s in process", count(float64(w)), map[bool]string{true: "", false: "s"}[w == 1])
		v, err := metric(r.acquisition, fmt.Sprintf("BenchmarkAcquisitionWithWatchers/dwell=zero/watchers=%d", w), "points/s")
		if err != nil {
			t.missing("2", label, err)
			continue
		}
		rw := row{section: "2", figure: label, value: count(v), baseline: base, ratio: times(v / one)}
		if w == 100 {
			rw.aim, rw.met = "≥ 20,000 points/s", yes(v >= 20000)
		}
		t.add(rw)
		if w == 100 {
			t.add(row{section: "2", figure: "The same, against the store's own limit", value: count(v),
				baseline: fmt.Sprintf("store alone, 1,024 points per fsync: %s points/s", count(best)), ratio: times(v / best)})
		}
	}
	if n := len(r.lengths); n > 0 {
		l := r.lengths[n-1]
		v := float64(l.Points) / l.Acquire.Seconds()
		t.add(row{section: "2", figure: fmt.Sprintf("The goniod process: %s points at zero dwell with one gRPC watcher, from submitting to done", count(float64(l.Points))),
			value: count(v), baseline: base, ratio: times(v / one)})
	}
	for _, c := range []struct {
		res   map[string]benchResult
		name  string
		label string
	}{
		{r.acquisition, "BenchmarkAcquisitionWithWatchers/dwell=zero/watchers=100", "Daemon time per point outside the driver, median: zero dwell, 100 watchers"},
		{r.realTime, "BenchmarkAcquisitionWithWatchers/dwell=20ms/watchers=1000", "The same, 20 ms dwell in real time, 1,000 watchers"},
	} {
		us, err := metric(c.res, c.name, "overhead-µs-p50")
		if err != nil {
			t.missing("2", c.label, err)
			continue
		}
		v := time.Duration(us * 1e3)
		rw := row{section: "2", figure: c.label, value: dur(v), aim: "≤ 50 µs", met: yes(v <= 50*time.Microsecond)}
		rw.baseline, rw.ratio = againstPoint(v, pointTime)
		t.add(rw)
	}
}

func streamingRows(t *table, r *results) {
	for _, l := range r.lengths {
		s := l.Streaming
		x := s.Goniod / s.Bare
		t.add(row{section: "3", figure: fmt.Sprintf("Watch stream of a stored %s-point scan (replay), points/s", count(float64(l.Points))),
			value: count(s.Goniod), baseline: "bare gRPC server, same messages: " + count(s.Bare), ratio: times(x), aim: "≥ 0.8", met: yes(x >= 0.8)})
		t.add(row{section: "3", figure: "The same: the server's processor time per point streamed (least of the rounds)",
			value: dur(s.GoniodCPU), baseline: "bare gRPC server: " + dur(s.BareCPU), ratio: times(float64(s.GoniodCPU) / float64(s.BareCPU))})
	}
}

// againstPoint is the baseline of a time per point: one point of a real instrument at 115200 baud (row 1),
// and the ratio of v to it; both empty when the serial section did not run.
func againstPoint(v, pointTime time.Duration) (baseline, ratio string) {
	if pointTime <= 0 {
		return "", ""
	}
	return "one point at 115200 baud (row 1): " + dur(pointTime), times(float64(v) / float64(pointTime))
}

func fanOutRows(t *table, r *results, pointTime time.Duration) {
	for _, c := range []struct {
		res   map[string]benchResult
		name  string
		label string
	}{
		{r.realTime, "BenchmarkAcquisitionWithWatchers/dwell=20ms/watchers=1000", "Fan-out, durable → arrival, 1,000 in-process watchers, a point every 20 ms: p50 / p99"},
		{r.acquisition, "BenchmarkAcquisitionWithWatchers/dwell=zero/watchers=1000", "The same at zero dwell (the processor saturated; see the note)"},
	} {
		p50, err1 := metric(c.res, c.name, "fanout-ms-p50")
		p99, err2 := metric(c.res, c.name, "fanout-ms-p99")
		if c.res == nil {
			continue
		}
		if err := firstErr(err1, err2); err != nil {
			t.missing("4", c.label, err)
			continue
		}
		d50, d99 := time.Duration(p50*1e6), time.Duration(p99*1e6)
		base, ratio := againstPoint(d99, pointTime)
		t.add(row{section: "4", figure: c.label, value: dur(d50) + " / " + dur(d99), baseline: base, ratio: ratio,
			aim: "p99 ≤ 5 ms", met: yes(d99 <= 5*time.Millisecond)})
	}
	if f := r.fanOut; f != nil {
		t.add(row{section: "4", figure: fmt.Sprintf("Taken → arrival (includes the fsync), %s gRPC watchers on loopback, a point every %s (%s deliveries): p50 / p99",
			count(float64(f.Watchers)), dur(f.Interval), count(float64(f.Goniod.Samples))), value: dur(f.Goniod.P50) + " / " + dur(f.Goniod.P99),
			baseline: "bare gRPC server, fsync and fan-out of the same points: " + dur(f.Bare.P50) + " / " + dur(f.Bare.P99),
			ratio:    times(float64(f.Goniod.P99) / float64(f.Bare.P99)), aim: "p99 ≤ 5 ms", met: yes(f.Goniod.P99 <= 5*time.Millisecond)})
	}
}

func memoryRows(t *table, r *results) {
	if r.idle.RSS == 0 {
		return
	}
	const aim = 40 << 20
	t.add(row{section: "5", figure: "Daemon RSS idle", value: mib(r.idle.RSS), aim: "≤ 40 MiB", met: yes(r.idle.RSS <= aim)})
	for _, l := range r.lengths {
		m := l.Memory
		t.add(row{section: "5", figure: fmt.Sprintf("Daemon RSS after storing and serving %s points: now (peak)", count(float64(l.Points))),
			value: mib(m.RSS) + " (" + mib(m.Peak) + ")", baseline: "idle: " + mib(r.idle.RSS),
			ratio: times(float64(m.Peak) / float64(r.idle.RSS)), aim: "≤ 40 MiB", met: yes(m.Peak <= aim)})
	}
	if n := len(r.lengths); n >= 2 {
		a, b := r.lengths[0], r.lengths[n-1]
		x := float64(b.Memory.Peak) / float64(a.Memory.Peak)
		t.add(row{section: "5", figure: fmt.Sprintf("Peak RSS, %s points against %s", count(float64(b.Points)), count(float64(a.Points))),
			value: mib(b.Memory.Peak), baseline: mib(a.Memory.Peak), ratio: times(x), aim: "flat (≤ 1.1)", met: yes(x <= 1.1)})
	}
}

func fetchRows(t *table, r *results) {
	for _, l := range r.lengths {
		f := l.Fetch
		same := "the same bytes as the points file"
		if !f.SameAsStore {
			same = "differs from the points file"
		}
		t.add(row{section: "6", figure: fmt.Sprintf("gonio fetch of %s points to a CSV file (%s), points/s", count(float64(l.Points)), same),
			value: count(f.Gonio), baseline: fmt.Sprintf("reading that file (%.0f MB, page cache): %s", float64(f.Bytes)/1e6, count(f.RawRead)),
			ratio: times(f.Gonio / f.RawRead)})
	}
}

func analysisRows(t *table, r *results) {
	a := r.analysis
	if ns, err := metric(r.analysisPkg, "BenchmarkFullAnalysis", "ns/op"); r.analysisPkg != nil {
		label := "Full analysis of a 10,000-point scan in process: peaks, fits, lines, lattice"
		if err != nil {
			t.missing("7", label, err)
		} else {
			v := time.Duration(ns)
			rw := row{section: "7", figure: label, value: dur(v), aim: "≤ 10 ms", met: yes(v <= 10*time.Millisecond)}
			if a != nil {
				rw.baseline, rw.ratio = "fetching a 10,000-point scan (client, CSV): "+dur(a.Fetch), times(float64(v)/float64(a.Fetch))
			}
			t.add(rw)
		}
	}
	if a != nil {
		t.add(row{section: "7", figure: fmt.Sprintf("The same on the daemon through gRPC, one lattice-fit call on a stored %s-point scan (d = %.5f nm from %d reflections)",
			count(float64(a.Points)), a.DNM, a.Reflections), value: dur(a.Analysis),
			baseline: "fetching that scan (client, CSV): " + dur(a.Fetch), ratio: times(float64(a.Analysis) / float64(a.Fetch))})
		t.add(row{section: "7", figure: "The same: the daemon's processor time per call, reading the scan included (mean)",
			value: dur(a.ServerCPU), aim: "≤ 10 ms", met: yes(a.ServerCPU <= 10*time.Millisecond)})
	}
}

func soakRows(t *table, r *results) {
	s := r.soak
	if s == nil {
		return
	}
	what := fmt.Sprintf("Load soak, %v: %s scans (%s done, %s cancelled running, %s cancelled queued), %s watches to the end, %s points delivered, %s polls",
		s.Duration.Round(time.Second), count(float64(s.Submitted)), count(float64(s.Done)), count(float64(s.CancelledRunning)),
		count(float64(s.CancelledQueued)), count(float64(s.Watches)), count(float64(s.Delivered)), count(float64(s.Polls)))
	t.add(row{section: "8", figure: what + ": errors", value: fmt.Sprint(s.Errors), aim: "0", met: yes(s.Errors == 0)})
	t.add(row{section: "8", figure: "Soak: points lost (watchers and store against each scan's record)", value: fmt.Sprint(s.Lost), aim: "0", met: yes(s.Lost == 0)})
	t.add(row{section: "8", figure: "Soak: time of a state poll under the load, p50 / p99", value: dur(s.PollTime.P50) + " / " + dur(s.PollTime.P99)})
	t.add(row{section: "8", figure: "Soak: the daemon's goroutines after the load, its connections closed", value: fmt.Sprint(s.GoroutinesAfter),
		baseline: fmt.Sprintf("before the load: %d", s.GoroutinesBefore), ratio: times(float64(s.GoroutinesAfter) / float64(s.GoroutinesBefore)),
		aim: "back to before", met: yes(s.GoroutinesAfter <= s.GoroutinesBefore)})
	if len(s.Memory) >= 4 {
		var peak int64
		for _, m := range s.Memory {
			peak = max(peak, m.RSS)
		}
		early, late := quarterMedians(s.Memory)
		t.add(row{section: "8", figure: "Soak: daemon RSS, median of the last quarter against the second quarter (highest reading)",
			value: mib(late) + " (" + mib(peak) + ")", baseline: "second quarter: " + mib(early),
			ratio: times(r.soakGrowth), aim: "stable (≤ 1.1)", met: yes(r.soakGrowth <= 1.1)})
		t.add(row{section: "8", figure: "Soak: that growth per scan submitted meanwhile (an ended scan keeps only its state in memory)",
			value: strconv.FormatFloat(float64(r.soakPerScan)/1024, 'f', 1, 64) + " KiB"})
	}
}

func firstErr(errs ...error) error {
	for _, err := range errs {
		if err != nil {
			return err
		}
	}
	return nil
}

func yes(ok bool) string {
	if ok {
		return "yes"
	}
	return "**no**"
}

// times prints a ratio with three significant digits (no more than the integer part above 100).
func times(x float64) string {
	if x >= 100 {
		return strconv.FormatFloat(x, 'f', 0, 64) + "×"
	}
	return strconv.FormatFloat(x, 'g', 3, 64) + "×"
}

// dur prints a duration with about three significant digits in a fitting unit.
func dur(d time.Duration) string {
	v, unit := float64(d)/1e3, " µs"
	switch {
	case d >= time.Second:
		v, unit = d.Seconds(), " s"
	case d >= time.Millisecond:
		v, unit = float64(d)/1e6, " ms"
	}
	digits := 2
	if v >= 100 {
		digits = 0
	} else if v >= 10 {
		digits = 1
	}
	return strconv.FormatFloat(v, 'f', digits, 64) + unit
}

// count prints a number rounded to an integer with thousands separators.
func count(v float64) string {
	s := strconv.FormatInt(int64(v+0.5), 10)
	var b strings.Builder
	for i, c := range s {
		if i > 0 && (len(s)-i)%3 == 0 {
			b.WriteByte(',')
		}
		b.WriteRune(c)
	}
	return b.String()
}
