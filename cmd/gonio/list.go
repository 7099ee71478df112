package main

import (
	"fmt"
	"io"
	"text/tabwriter"

	"github.com/spf13/cobra"

	"goniod/client"
)

func (a *app) listCommand() *cobra.Command {
	var limit int
	var all bool
	var states []string
	cmd := &cobra.Command{
		Use:   "list",
		Short: "List scans, newest first",
		Example: `  gonio list
  gonio list --state running,queued,held
  gonio list --all --output json`,
		Args: cobra.NoArgs,
		RunE: func(cmd *cobra.Command, _ []string) error {
			c, err := a.connect()
			if err != nil {
				return err
			}
			defer c.Close()
			o := client.ListOptions{PageSize: min(limit, 1000)}
			for _, s := range states {
				o.States = append(o.States, client.State(s))
			}
			var scans []client.Scan
			for {
				page, next, err := c.List(a.ctx, o)
				if err != nil {
					return err
				}
				scans = append(scans, page...)
				if next == "" || (!all && len(scans) >= limit) {
					break
				}
				o.PageToken = next
			}
			if !all && len(scans) > limit {
				scans = scans[:limit]
			}
			return a.printScans(scans)
		},
	}
	cmd.Flags().IntVar(&limit, "limit", 20, "show at most this many scans")
	cmd.Flags().BoolVar(&all, "all", false, "show every scan")
	cmd.Flags().StringSliceVar(&states, "state", nil, "only scans in these states (queued, running, paused, interrupted, held, done, failed, cancelled)")
	return cmd
}

func (a *app) printScans(scans []client.Scan) error { return writeScans(a.stdout, a.output, scans) }

// writeScans renders scans as a table, one JSON array, or CSV.
func writeScans(w io.Writer, format string, scans []client.Scan) error {
	switch format {
	case outJSON:
		out := make([]scanView, len(scans))
		for i, s := range scans {
			out[i] = viewOf(s)
		}
		return writeJSON(w, out)
	case outCSV:
		return writeScansCSV(w, scans)
	}
	tw := tabwriter.NewWriter(w, 0, 4, 2, ' ', 0)
	fmt.Fprintln(tw, "ID\tSTATE\tKIND\tPOINTS\tRANGE\tTUBE\tLABEL\tCREATED")
	for _, s := range scans {
		tube := "-"
		if src := s.Request.Source; src != nil {
			tube = fmt.Sprintf("%g kV %g mA", src.KV, src.MA)
		}
		fmt.Fprintf(tw, "%s\t%s\t%s\t%d/%d\t%s\t%s\t%s\t%s\n", s.ID, s.State, s.Request.Kind, s.PointsDone, s.PointsTotal,
			describeRange(s.Request), tube, s.Request.Label, s.Created.Local().Format("2006-01-02 15:04"))
	}
	return tw.Flush()
}
