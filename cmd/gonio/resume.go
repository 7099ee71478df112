package main

import "github.com/spf13/cobra"

func (a *app) resumeCommand() *cobra.Command {
	return &cobra.Command{
		Use:     "resume ID",
		Short:   "Resume a paused or interrupted scan from its next point",
		Example: "  gonio resume scan-000001",
		Args:    cobra.ExactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			return a.scanOp(args[0], "resume")
		},
	}
}
