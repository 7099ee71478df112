package main

import (
	"context"
	"errors"
	"fmt"
	"io"
	"os"
	"strings"
	"text/tabwriter"
	"time"

	"github.com/spf13/cobra"

	"goniod/client"
)

func (a *app) runCommand() *cobra.Command {
	var check, detach bool
	cmd := &cobra.Command{
		Use:   "run PLAN.yaml",
		Short: "Submit the scans of a plan file (a sequence, a series) and follow them",
		Long: `Reads a plan (see ` + "`gonio help plans`" + ` for the format), checks all of it, submits its scans in order and
follows each with a progress line until the last one ends. With --detach it prints the scan IDs and returns;
with --check it only checks the file and shows what would run, without contacting the daemon.`,
		Example: `  gonio run lif-batch7.yaml
  gonio run lif-batch7.yaml --check
  gonio run voltage-series.yaml --detach --output json`,
		Args: cobra.ExactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			if err := a.checkOutput(); err != nil {
				return err
			}
			data, err := os.ReadFile(args[0])
			if err != nil {
				return withCode(exitUsage, err)
			}
			p, err := parsePlan(args[0], data)
			if err != nil {
				return withCode(exitUsage, err)
			}
			if check {
				return writePlan(a.stdout, p)
			}
			return a.runPlan(args[0], p, detach)
		},
	}
	cmd.Flags().BoolVar(&check, "check", false, "only check the plan and show its scans; submit nothing")
	cmd.Flags().BoolVar(&detach, "detach", false, "print the scan IDs and return at once instead of following the scans")
	return cmd
}

// submittedEntry is what one plan entry became on the daemon.
type submittedEntry struct {
	Line     int      `json:"line"`
	SeriesID string   `json:"series_id,omitempty"`
	ScanIDs  []string `json:"scan_ids"`
}

// runPlan submits every entry; when the daemon refuses one, the plan's scans already queued are cancelled.
func (a *app) runPlan(file string, p *plan, detach bool) error {
	c, err := a.connect()
	if err != nil {
		return err
	}
	defer c.Close()
	cfg, err := c.Config(a.ctx)
	if err != nil {
		return err
	}
	if e, fields := preflight(p, cfg); len(fields) > 0 {
		return planRefusal(file, e, &client.Error{Kind: client.ErrInvalid, Message: "refused", Fields: fields}, 0)
	}
	var done []submittedEntry
	for _, e := range p.entries {
		s, err := submitEntry(a.ctx, c, e)
		if err != nil {
			n := a.cancelSubmitted(c, done)
			return planRefusal(file, e, err, n)
		}
		done = append(done, s)
	}
	var ids []string
	for _, s := range done {
		ids = append(ids, s.ScanIDs...)
	}
	if a.output == outJSON {
		if err := writeJSON(a.stdout, map[string]any{"plan": p.name, "entries": done}); err != nil {
			return err
		}
	} else {
		fmt.Fprintf(a.stderr, "plan %s: %d scans queued\n", planName(file, p), len(ids))
		fmt.Fprintln(a.stdout, strings.Join(ids, "\n"))
	}
	if detach {
		return nil
	}
	var failed []string
	for _, id := range ids {
		err := a.follow(c, id, viewProgress)
		var ce *codedError
		switch {
		case errors.As(err, &ce) && ce.code == exitScanFailed:
			failed = append(failed, id)
		case err != nil:
			return err
		}
	}
	if len(failed) > 0 {
		return withCode(exitScanFailed, fmt.Errorf("plan %s: %d of %d scans did not finish: %s", planName(file, p),
			len(failed), len(ids), strings.Join(failed, ", ")))
	}
	return nil
}

func submitEntry(ctx context.Context, c *client.Client, e planEntry) (submittedEntry, error) {
	out := submittedEntry{Line: e.line}
	if len(e.series) > 0 {
		r := client.SeriesRequest{Scan: e.scan, Sources: e.series, Settle: e.scan.Settle, KeepHighVoltage: e.scan.KeepHighVoltage}
		r.Scan.Source = nil
		s, err := c.SubmitSeries(ctx, r)
		out.SeriesID, out.ScanIDs = s.ID, s.ScanIDs
		return out, err
	}
	s, err := c.Submit(ctx, e.scan)
	out.ScanIDs = []string{s.ID}
	return out, err
}

// cancelSubmitted cancels the scans a refused plan had queued; it reports how many it cancelled.
func (a *app) cancelSubmitted(c *client.Client, done []submittedEntry) int {
	ctx, cancel := context.WithTimeout(context.WithoutCancel(a.ctx), 10*time.Second)
	defer cancel()
	n := 0
	for _, s := range done {
		for _, id := range s.ScanIDs {
			if _, err := c.Cancel(ctx, id); err == nil {
				n++
			} else {
				fmt.Fprintf(a.stderr, "gonio: could not cancel %s: %v\n", id, err)
			}
		}
	}
	return n
}

// planRefusal names the plan line of each refused field.
func planRefusal(file string, e planEntry, err error, cancelled int) error {
	var b strings.Builder
	fmt.Fprintf(&b, "%s:%d: scan refused", file, e.line)
	switch {
	case cancelled == 1:
		b.WriteString(" (the scan of the plan already queued was cancelled)")
	case cancelled > 1:
		fmt.Fprintf(&b, " (the %d scans of the plan already queued were cancelled)", cancelled)
	}
	fields := client.FieldErrors(err)
	if len(fields) == 0 {
		fmt.Fprintf(&b, ": %v", err)
	}
	for _, f := range fields {
		fmt.Fprintf(&b, "\n%s:%d: %s: %s", file, e.fieldLine(f.Field), f.Field, f.Reason)
	}
	return &codedError{code: exitCode(err), err: errors.New(b.String())}
}

func planName(file string, p *plan) string {
	if p.name != "" {
		return fmt.Sprintf("%q", p.name)
	}
	return file
}

// writePlan shows what a plan would run (gonio run --check).
func writePlan(w io.Writer, p *plan) error {
	tw := tabwriter.NewWriter(w, 0, 4, 2, ' ', 0)
	if p.name != "" {
		fmt.Fprintf(tw, "plan %q\n", p.name)
	}
	fmt.Fprintln(tw, "LINE\tKIND\tRANGE\tCOUNTING\tTUBE\tLABEL")
	scans := 0
	for _, e := range p.entries {
		counting := e.scan.Dwell.String()
		if e.scan.RelativeError > 0 {
			counting = fmt.Sprintf("to %.3g, at most %s", e.scan.RelativeError, counting)
		}
		tube, n := "-", 1
		switch {
		case len(e.series) > 0:
			var parts []string
			for _, s := range e.series {
				parts = append(parts, fmt.Sprintf("%g kV %g mA", s.KV, s.MA))
			}
			tube, n = "series: "+strings.Join(parts, ", "), len(e.series)
		case e.scan.Source != nil:
			tube = fmt.Sprintf("%g kV %g mA", e.scan.Source.KV, e.scan.Source.MA)
		}
		scans += n
		fmt.Fprintf(tw, "%d\t%s\t%s\t%s\t%s\t%s\n", e.line, e.scan.Kind, describeRange(e.scan), counting, tube, e.scan.Label)
	}
	fmt.Fprintf(tw, "%d scans; the plan is valid\n", scans)
	return tw.Flush()
}
