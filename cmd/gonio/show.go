package main

import (
	"fmt"
	"io"
	"text/tabwriter"

	"github.com/spf13/cobra"

	"goniod/client"
)

func (a *app) showCommand() *cobra.Command {
	return &cobra.Command{
		Use:     "show ID",
		Short:   "Show one scan: state, progress, request and where it was taken",
		Example: "  gonio show scan-000001\n  gonio show scan-000001 --output json",
		Args:    cobra.ExactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			c, err := a.connect()
			if err != nil {
				return err
			}
			defer c.Close()
			s, err := c.Scan(a.ctx, args[0])
			if err != nil {
				return err
			}
			return writeScan(a.stdout, a.output, s)
		},
	}
}

// writeScan renders one scan record: a table of its fields, one JSON object, or CSV.
func writeScan(w io.Writer, format string, s client.Scan) error {
	switch format {
	case outJSON:
		return writeJSON(w, viewOf(s))
	case outCSV:
		return writeScansCSV(w, []client.Scan{s})
	}
	tw := tabwriter.NewWriter(w, 0, 4, 2, ' ', 0)
	row := func(k, format string, v ...any) { fmt.Fprintf(tw, "%s\t"+format+"\n", append([]any{k}, v...)...) }
	row("scan", "%s", s.ID)
	if s.SeriesID != "" {
		row("series", "%s", s.SeriesID)
	}
	row("state", "%s", s.State)
	if s.Reason != "" {
		row("reason", "%s", s.Reason)
	}
	row("points", "%d of %d", s.PointsDone, s.PointsTotal)
	row("kind", "%s: %s", s.Request.Kind, describeRange(s.Request))
	if s.Request.RelativeError > 0 {
		row("counting", "to %.3g relative error, at most %v per point", s.Request.RelativeError, s.Request.Dwell)
	} else {
		row("counting", "%v per point", s.Request.Dwell)
	}
	if src := s.Request.Source; src != nil {
		row("tube", "%g kV, %g mA", src.KV, src.MA)
	}
	for _, kv := range [][2]string{{"label", s.Request.Label}, {"operator", s.Request.Operator}, {"note", s.Request.Note}} {
		if kv[1] != "" {
			row(kv[0], "%s", kv[1])
		}
	}
	row("created", "%s", localTime(s.Created))
	if !s.Started.IsZero() {
		row("started", "%s", localTime(s.Started))
	}
	if !s.Ended.IsZero() {
		row("ended", "%s", localTime(s.Ended))
	}
	row("instrument", "%s (driver %s, config %s)", s.Info.Instrument, s.Info.Driver, s.Info.ConfigHash)
	if s.Info.Identity != "" {
		row("identity", "%s", s.Info.Identity)
	}
	if s.Info.Anode != "" || s.Info.Crystal != "" {
		row("anode/crystal", "%s / %s (d = %g nm)", s.Info.Anode, s.Info.Crystal, s.Info.CrystalDNM)
	}
	row("daemon", "%s", s.Info.DaemonVersion)
	return tw.Flush()
}
