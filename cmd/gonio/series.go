package main

import (
	"fmt"
	"io"

	"github.com/spf13/cobra"

	"goniod/client"
)

func (a *app) seriesCommand() *cobra.Command {
	return &cobra.Command{
		Use:   "series ID",
		Short: "Show a series: its scans, their tube settings and states",
		Long: `A series is one scan request run once per tube setting (see --series-kv of gonio scan, or a plan's
series). This shows each of its scans in order.`,
		Example: `  gonio series series-000001
  gonio series series-000001 --output csv`,
		Args:              cobra.ExactArgs(1),
		ValidArgsFunction: a.completeSeriesIDs,
		RunE: func(cmd *cobra.Command, args []string) error {
			c, err := a.connect()
			if err != nil {
				return err
			}
			defer c.Close()
			s, err := c.Series(a.ctx, args[0])
			if err != nil {
				return err
			}
			scans := make([]client.Scan, 0, len(s.ScanIDs))
			for _, id := range s.ScanIDs {
				sc, err := c.Scan(a.ctx, id)
				if err != nil {
					return fmt.Errorf("scan %s of series %s: %w", id, s.ID, err)
				}
				scans = append(scans, sc)
			}
			return writeSeries(a.stdout, a.output, s, scans)
		},
	}
}

// writeSeries renders a series and its scans.
func writeSeries(w io.Writer, format string, s client.Series, scans []client.Scan) error {
	switch format {
	case outJSON:
		views := make([]scanView, len(scans))
		for i, sc := range scans {
			views[i] = viewOf(sc)
		}
		return writeJSON(w, struct {
			ID    string     `json:"id"`
			Scans []scanView `json:"scans"`
		}{s.ID, views})
	case outCSV:
		return writeScansCSV(w, scans)
	}
	done := 0
	for _, sc := range scans {
		if sc.State == client.Done {
			done++
		}
	}
	fmt.Fprintf(w, "series %s: %d scans, %d done\n", s.ID, len(scans), done)
	return writeScans(w, outTable, scans)
}
