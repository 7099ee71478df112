package main

import (
	"github.com/spf13/cobra"
)

func (a *app) watchCommand() *cobra.Command {
	return &cobra.Command{
		Use:   "watch ID",
		Short: "Follow a scan: every stored point, then live points, until the scan ends",
		Long: `Prints every point of the scan (stored ones first, then live ones as they are taken) and returns when
the scan is done, failed or cancelled. Pauses and interruptions are reported on stderr; the watch goes on.
With --output json each point is one JSON object per line with the CSV column names as keys.`,
		Example: `  gonio watch scan-000001
  gonio watch scan-000001 --output json | jq .rate_cps`,
		Args: cobra.ExactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			c, err := a.connect()
			if err != nil {
				return err
			}
			defer c.Close()
			return a.follow(c, args[0], true)
		},
	}
}
