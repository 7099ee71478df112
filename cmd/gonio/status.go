package main

import (
	"fmt"
	"text/tabwriter"

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
	return &cobra.Command{
		Use:     "status",
		Short:   "Show the instrument: axes, tube, interlock, link, count rate, running scan",
		Example: "  gonio status\n  gonio status --output json",
		Args:    cobra.NoArgs,
		RunE: func(cmd *cobra.Command, _ []string) error {
			c, err := a.connect()
			if err != nil {
				return err
			}
			defer c.Close()
			s, err := c.State(a.ctx)
			if err != nil {
				return err
			}
			if a.output == "json" {
				return a.printJSON(stateViewOf(s))
			}
			tw := tabwriter.NewWriter(a.stdout, 0, 4, 2, ' ', 0)
			fmt.Fprintf(tw, "instrument\t%s (driver %s, goniod %s)\n", s.Instrument, s.Driver, s.DaemonVersion)
			for _, ax := range s.Axes {
				fmt.Fprintf(tw, "%s\t%.4f°\t(limits %g° to %g°)\n", ax.Name, ax.Position, ax.MinDeg, ax.MaxDeg)
			}
			fmt.Fprintf(tw, "tube\t%g kV, %g mA, high voltage %s\n", s.KV, s.MA, onOff(s.HighVoltage))
			interlock := "closed"
			if !s.InterlockClosed {
				interlock = "OPEN"
			}
			fmt.Fprintf(tw, "interlock\t%s\n", interlock)
			link := s.Link
			if s.LinkReason != "" {
				link += " (" + s.LinkReason + ")"
			}
			fmt.Fprintf(tw, "link\t%s\n", link)
			fmt.Fprintf(tw, "count rate\t%.1f cps (dead-time corrected %.1f cps)\n", s.Rate, s.CorrectedRate)
			if s.ScanID != "" {
				fmt.Fprintf(tw, "scan\t%s %s\n", s.ScanID, s.ScanState)
			} else {
				fmt.Fprintf(tw, "scan\tnone running\n")
			}
			fmt.Fprintf(tw, "queue\t%d waiting\n", s.QueueLength)
			return tw.Flush()
		},
	}
}
