package main

import "github.com/spf13/cobra"

func (a *app) releaseCommand() *cobra.Command {
	return &cobra.Command{
		Use:     "release ID",
		Short:   "Release a held scan (queued when the daemon stopped) so it can run",
		Example: "  gonio release scan-000001",
		Args:    cobra.ExactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			return a.scanOp(args[0], "release")
		},
	}
}
