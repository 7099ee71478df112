package main

import (
	"fmt"
	"io"
	"strings"
	"text/tabwriter"
	"time"

	"github.com/spf13/cobra"

	"goniod/client"
)

// stateView is the instrument state's JSON form.
type stateView struct {
	Instrument      string             `json:"instrument"`
	Driver          string             `json:"driver"`
	Axes            map[string]float64 `json:"axes_deg"`
	KV              float64            `json:"tube_kv"`
	MA              float64            `json:"tube_ma"`
	HighVoltage     bool               `json:"high_voltage"`
	InterlockClosed bool               `json:"interlock_closed"`
	Link            string             `json:"link"`
	LinkReason      string             `json:"link_reason,omitempty"`
	Rate            float64            `json:"rate_cps"`
	CorrectedRate   float64            `json:"corrected_rate_cps"`
	ScanID          string             `json:"scan_id,omitempty"`
	ScanState       client.State       `json:"scan_state,omitempty"`
	QueueLength     int                `json:"queue_length"`
	DaemonVersion   string             `json:"daemon_version"`
}

func stateViewOf(s client.InstrumentState) stateView {
	v := stateView{Instrument: s.Instrument, Driver: s.Driver, Axes: map[string]float64{}, KV: s.KV, MA: s.MA,
		HighVoltage: s.HighVoltage, InterlockClosed: s.InterlockClosed, Link: s.Link, LinkReason: s.LinkReason,
		Rate: s.Rate, CorrectedRate: s.CorrectedRate, ScanID: s.ScanID, ScanState: s.ScanState,
		QueueLength: s.QueueLength, DaemonVersion: s.DaemonVersion}
	for _, a := range s.Axes {
		v.Axes[a.Name] = a.Position
	}
	return v
}

func onOff(b bool) string {
	if b {
		return "ON"
	}
	return "off"
}

func (a *app) statusCommand() *cobra.Command {
	var follow, all bool
	var every time.Duration
	cmd := &cobra.Command{
		Use:   "status",
		Short: "Show the instrument: axes, tube, interlock, link, count rate, running scan",
		Long: `Shows the daemon's view of the instrument. --follow keeps showing it as it changes (redrawn in place on a
terminal, one line per change otherwise) until interrupted. --all shows every instrument of the configuration
file side by side; an instrument that does not answer is marked unreachable and the others are still shown.`,
		Example: `  gonio status
  gonio status --output json
  gonio status --follow --every 2s
  gonio status --all
  gonio --instrument bench-b status`,
		Args: cobra.NoArgs,
		RunE: func(cmd *cobra.Command, _ []string) error {
			if all && follow {
				return usageError("--all and --follow do not go together")
			}
			if every < 50*time.Millisecond {
				return usageError("--every %v: at least 50ms", every)
			}
			if all {
				return a.statusAll()
			}
			c, err := a.connect()
			if err != nil {
				return err
			}
			defer c.Close()
			if follow {
				return a.followState(c, every)
			}
			s, err := c.State(a.ctx)
			if err != nil {
				return err
			}
			return writeState(a.stdout, a.output, s)
		},
	}
	cmd.Flags().BoolVarP(&follow, "follow", "f", false, "keep showing the state as it changes, until interrupted")
	cmd.Flags().DurationVar(&every, "every", time.Second, "with --follow: time between updates")
	cmd.Flags().BoolVar(&all, "all", false, "show every instrument of the configuration file side by side")
	return cmd
}

// writeState renders an instrument state as a table, one JSON object, or CSV.
func writeState(w io.Writer, format string, s client.InstrumentState) error {
	switch format {
	case outJSON:
		return writeJSON(w, stateViewOf(s))
	case outCSV:
		axes := stateAxes(s)
		return writeCSV(w, stateColumns(axes), stateRow(s, axes))
	}
	tw := tabwriter.NewWriter(w, 0, 4, 2, ' ', 0)
	fmt.Fprintf(tw, "instrument\t%s (driver %s, goniod %s)\n", s.Instrument, s.Driver, s.DaemonVersion)
	for _, ax := range s.Axes {
		fmt.Fprintf(tw, "%s\t%.4f°\t(limits %g° to %g°)\n", ax.Name, ax.Position, ax.MinDeg, ax.MaxDeg)
	}
	fmt.Fprintf(tw, "tube\t%g kV, %g mA, high voltage %s\n", s.KV, s.MA, onOff(s.HighVoltage))
	fmt.Fprintf(tw, "interlock\t%s\n", interlockText(s.InterlockClosed))
	fmt.Fprintf(tw, "link\t%s\n", linkText(s))
	fmt.Fprintf(tw, "count rate\t%.1f cps (dead-time corrected %.1f cps)\n", s.Rate, s.CorrectedRate)
	if s.ScanID != "" {
		fmt.Fprintf(tw, "scan\t%s %s\n", s.ScanID, s.ScanState)
	} else {
		fmt.Fprintf(tw, "scan\tnone running\n")
	}
	fmt.Fprintf(tw, "queue\t%d waiting\n", s.QueueLength)
	return tw.Flush()
}

func interlockText(closed bool) string {
	if closed {
		return "closed"
	}
	return "OPEN"
}

func linkText(s client.InstrumentState) string {
	if s.LinkReason != "" {
		return s.Link + " (" + s.LinkReason + ")"
	}
	return s.Link
}

// stateLine is an instrument state on one line, for --follow without a terminal.
func stateLine(s client.InstrumentState) string {
	var b strings.Builder
	b.WriteString(s.Time.Local().Format("15:04:05"))
	for _, ax := range s.Axes {
		fmt.Fprintf(&b, "  %s %.4f°", ax.Name, ax.Position)
	}
	fmt.Fprintf(&b, "  tube %g kV %g mA HV %s  interlock %s  link %s  %.1f cps", s.KV, s.MA, onOff(s.HighVoltage),
		interlockText(s.InterlockClosed), s.Link, s.Rate)
	if s.ScanID != "" {
		fmt.Fprintf(&b, "  %s %s", s.ScanID, s.ScanState)
	}
	fmt.Fprintf(&b, "  queue %d", s.QueueLength)
	return b.String()
}

// followState shows the instrument state as it comes from the daemon until the context ends (Ctrl-C), which is
// a normal end.
func (a *app) followState(c *client.Client, every time.Duration) error {
	st, err := c.WatchState(a.ctx, every)
	if err != nil {
		return err
	}
	scr := &screen{w: a.stdout, tty: isTerminal(a.stdout)}
	var axes []string
	var lastLine string
	for s := range st.C {
		switch {
		case a.output == outJSON:
			v := stateViewOf(s)
			err = writeJSON(a.stdout, struct {
				Time time.Time `json:"time"`
				stateView
			}{s.Time, v})
		case a.output == outCSV:
			if axes == nil {
				axes = stateAxes(s)
				err = writeCSV(a.stdout, append([]string{"time"}, stateColumns(axes)...))
			}
			if err == nil {
				err = writeCSV(a.stdout, nil, append([]string{timeText(s.Time)}, stateRow(s, axes)...))
			}
		case scr.tty:
			var b strings.Builder
			if err = writeState(&b, outTable, s); err == nil {
				scr.redraw(b.String() + "updated " + s.Time.Local().Format("15:04:05") + " (Ctrl-C to stop)\n")
			}
		default:
			// One line per change: the time alone changing is not news in a log.
			line := stateLine(s)
			if _, rest, _ := strings.Cut(line, "  "); rest != lastLine {
				lastLine = rest
				_, err = fmt.Fprintln(a.stdout, line)
			}
		}
		if err != nil {
			return err
		}
	}
	if err := st.Err(); err != nil && a.ctx.Err() == nil {
		return err
	}
	return nil
}
