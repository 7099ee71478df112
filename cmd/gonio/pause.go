package main

import "github.com/spf13/cobra"

func (a *app) pauseCommand() *cobra.Command {
	return &cobra.Command{
		Use:     "pause ID",
		Short:   "Pause a running scan after its current point (high voltage goes off; the queue waits)",
		Example: "  gonio pause scan-000001",
		Args:    cobra.ExactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			return a.scanOp(args[0], "pause")
		},
	}
}
