package main

import (
	"fmt"
	"io"
	"strings"
	"time"

	"goniod/client"
)

// progress renders a one-line progress display: in place on a terminal, as occasional lines otherwise.
type progress struct {
	w       io.Writer
	tty     bool
	id      string
	state   client.State
	reason  string
	total   int
	done    int
	rate    float64
	lead    string
	angle   float64
	t0      time.Time
	done0   int
	last    time.Time
	lastPct int
	drawn   bool
}

func (p *progress) eta() string {
	if p.done <= p.done0 || p.total == 0 {
		return "--:--"
	}
	el := time.Since(p.t0)
	per := el / time.Duration(p.done-p.done0)
	left := per * time.Duration(p.total-p.done)
	h, m, s := int(left.Hours()), int(left.Minutes())%60, int(left.Seconds())%60
	if h > 0 {
		return fmt.Sprintf("%d:%02d:%02d", h, m, s)
	}
	return fmt.Sprintf("%d:%02d", m, s)
}

func (p *progress) line() string {
	frac := 0.0
	if p.total > 0 {
		frac = float64(p.done) / float64(p.total)
	}
	s := fmt.Sprintf("%s %-11s %s %3.0f%% %d/%d  ETA %s  %.0f cps", p.id, p.state, progressBar(frac, 20), 100*frac,
		p.done, p.total, p.eta(), p.rate)
	if p.lead != "" {
		s += fmt.Sprintf("  %s %.3f°", p.lead, p.angle)
	}
	return s
}

// progressBar draws a fraction as a bar of width cells.
func progressBar(frac float64, width int) string {
	n := min(max(int(frac*float64(width)+0.5), 0), width)
	return "[" + strings.Repeat("█", n) + strings.Repeat("░", width-n) + "]"
}

// update redraws when due.
func (p *progress) update(force bool) {
	now := time.Now()
	if p.tty {
		if !force && now.Sub(p.last) < 100*time.Millisecond {
			return
		}
		fmt.Fprintf(p.w, "\r\033[K%s", p.line())
		p.drawn = true
		p.last = now
		return
	}
	pct := 0
	if p.total > 0 {
		pct = 100 * p.done / p.total
	}
	if force || pct/10 > p.lastPct/10 {
		fmt.Fprintln(p.w, p.line())
		p.lastPct = pct
	}
}

// finish ends the in-place line.
func (p *progress) finish() {
	if p.tty && p.drawn {
		fmt.Fprintln(p.w)
	}
}

// followView is how a followed scan is shown.
type followView int

const (
	viewProgress followView = iota // a progress line on stderr (gonio scan, gonio run)
	viewPoints                     // every point on stdout: a table row, a JSON or CSV line
	viewPlot                       // a live text plot of the points, redrawn in place on the terminal
)

// follow watches a scan until it ends. State changes go to stderr (with viewPlot, into the plot's heading).
// The error reports a scan that failed or was cancelled.
func (a *app) follow(c *client.Client, id string, view followView) error {
	st, err := c.Watch(a.ctx, id, 0)
	if err != nil {
		return err
	}
	f := &follower{a: a, id: id, view: view,
		pr: &progress{w: a.stderr, tty: isTerminal(a.stderr) && view == viewProgress, id: id, t0: time.Now(), done0: -1}}
	for ev := range st.C {
		if ev.Scan != nil {
			f.onScan(*ev.Scan, ev.End)
		}
		if ev.Point != nil {
			if err := f.onPoint(*ev.Point); err != nil {
				return err
			}
		}
	}
	if view == viewProgress {
		f.pr.update(true)
		f.pr.finish()
	}
	if err := st.Err(); err != nil {
		return err
	}
	if f.final == nil {
		return fmt.Errorf("watch of %s ended early", id)
	}
	if f.final.State != client.Done {
		return withCode(exitScanFailed, fmt.Errorf("scan %s ended %s: %s", id, f.final.State, f.final.Reason))
	}
	return nil
}

// follower shows the events of one watched scan.
type follower struct {
	a       *app
	id      string
	view    followView
	pr      *progress
	printer *pointPrinter
	live    *livePlot
	final   *client.Scan
}

// onScan takes a state change: reported on stderr (except the first "running" of a progress view), and kept
// for the progress line and the end.
func (f *follower) onScan(s client.Scan, end bool) {
	pr := f.pr
	if f.printer == nil && f.view == viewPoints {
		f.printer = f.a.newPointPrinter(s)
	}
	if f.live == nil && f.view == viewPlot {
		f.live = newLivePlot(f.a.stdout, s)
	}
	if (s.State != pr.state || s.Reason != pr.reason) && f.view != viewPlot &&
		(pr.state != "" || s.State != client.Running || f.view == viewPoints) {
		pr.finish()
		msg := fmt.Sprintf("%s %s", f.id, s.State)
		if s.Reason != "" {
			msg += ": " + s.Reason
		}
		fmt.Fprintln(f.a.stderr, msg)
		pr.drawn = false
	}
	pr.state, pr.reason, pr.total, pr.done = s.State, s.Reason, s.PointsTotal, s.PointsDone
	if pr.done0 < 0 {
		pr.done0, pr.t0 = s.PointsDone, time.Now()
	}
	if end {
		f.final = &s
	}
	if f.live != nil {
		f.live.status = pr.line()
		f.live.draw(end)
	}
}

// onPoint shows a point the way the view asks.
func (f *follower) onPoint(p client.Point) error {
	pr := f.pr
	pr.done, pr.rate = p.Index+1, p.Rate
	if len(p.Axes) > 0 {
		pr.lead, pr.angle = p.Axes[0].Name, p.Axes[0].Actual
	}
	if (f.view == viewPoints && f.printer == nil) || (f.view == viewPlot && f.live == nil) {
		// The protocol starts every watch with the scan's record, which gives the columns.
		return fmt.Errorf("watch of %s: a point came before the scan's record", f.id)
	}
	switch f.view {
	case viewPoints:
		return f.printer.print(p)
	case viewPlot:
		f.live.add(p)
		f.live.status = pr.line()
		f.live.draw(false)
	default:
		pr.update(false)
	}
	return nil
}

// pointPrinter writes points in the chosen output format.
type pointPrinter struct {
	a      *app
	scan   client.Scan
	header bool
	buf    []byte
	widths []int // of the table's axis columns
}

func (a *app) newPointPrinter(s client.Scan) *pointPrinter { return &pointPrinter{a: a, scan: s} }

func (pp *pointPrinter) print(p client.Point) error {
	table := client.PointTable(pp.scan)
	switch pp.a.output {
	case "json":
		pp.buf = table.AppendJSON(pp.buf[:0], p.Proto())
		_, err := pp.a.stdout.Write(pp.buf)
		return err
	case "csv":
		if !pp.header {
			pp.header = true
			if _, err := io.WriteString(pp.a.stdout, table.Header()); err != nil {
				return err
			}
		}
		pp.buf = table.AppendCSV(pp.buf[:0], p.Proto())
		_, err := pp.a.stdout.Write(pp.buf)
		return err
	}
	if !pp.header {
		pp.header = true
		var cols []string
		for _, ax := range p.Axes {
			name := ax.Name + "_deg"
			pp.widths = append(pp.widths, max(10, len(name)))
			cols = append(cols, fmt.Sprintf("%*s", max(10, len(name)), name))
		}
		fmt.Fprintf(pp.a.stdout, "%6s %s %8s %10s %12s %10s\n", "index", strings.Join(cols, " "), "dwell_s", "counts", "rate_cps", "±err")
	}
	var cols []string
	for i, ax := range p.Axes {
		w := 10
		if i < len(pp.widths) {
			w = pp.widths[i]
		}
		cols = append(cols, fmt.Sprintf("%*.4f", w, ax.Actual))
	}
	_, err := fmt.Fprintf(pp.a.stdout, "%6d %s %8.3g %10d %12.2f %10.2f\n", p.Index, strings.Join(cols, " "), p.Dwell, p.Counts, p.Rate, p.RateErr)
	return err
}
