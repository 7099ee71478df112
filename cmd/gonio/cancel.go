package main

import "github.com/spf13/cobra"

func (a *app) cancelCommand() *cobra.Command {
	return &cobra.Command{
		Use:     "cancel ID",
		Short:   "Cancel a scan: at once when it waits, after the current point when it runs",
		Example: "  gonio cancel scan-000001",
		Args:    cobra.ExactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			return a.scanOp(args[0], "cancel")
		},
	}
}
