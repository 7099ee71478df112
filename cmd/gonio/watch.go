package main

import (
	"github.com/spf13/cobra"
)

func (a *app) watchCommand() *cobra.Command {
	var plain bool
	cmd := &cobra.Command{
		Use:   "watch ID",
		Short: "Follow a scan: every stored point, then live points, until the scan ends",
		Long: `Follows the scan from its first point (stored ones first, then live ones as they are taken) and returns
when the scan is done, failed or cancelled. On a terminal it draws a live plot of counts against the scanned
angle, redrawn in place, under a progress line; otherwise (or with --plain) it prints one line per point.
With --output json each point is one JSON object per line with the CSV column names as keys; with --output csv
the lines are CSV with a header. Pauses and interruptions are reported; the watch goes on.`,
		Example: `  gonio watch scan-000001
  gonio watch scan-000001 --plain
  gonio watch scan-000001 --output json | jq .rate_cps`,
		Args: cobra.ExactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			c, err := a.connect()
			if err != nil {
				return err
			}
			defer c.Close()
			view := viewPoints
			if a.output == outTable && !plain && isTerminal(a.stdout) {
				view = viewPlot
			}
			return a.follow(c, args[0], view)
		},
	}
	cmd.Flags().BoolVar(&plain, "plain", false, "one line per point even on a terminal (no live plot)")
	return cmd
}
