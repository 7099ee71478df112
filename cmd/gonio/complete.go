package main

import (
	"context"
	"strings"
	"time"

	"github.com/spf13/cobra"

	"goniod/client"
)

// registerCompletions adds completion of scan IDs and of fixed flag values to the commands. Shell completion
// itself is cobra's: `gonio completion bash|zsh|fish|powershell`.
func registerCompletions(a *app, root *cobra.Command) {
	_ = root.RegisterFlagCompletionFunc("output", fixed("table", "json", "csv"))
	_ = root.RegisterFlagCompletionFunc("instrument", func(*cobra.Command, []string, string) ([]string, cobra.ShellCompDirective) {
		cfg, err := a.settings()
		if err != nil {
			return nil, cobra.ShellCompDirectiveNoFileComp
		}
		return cfg.names(), cobra.ShellCompDirectiveNoFileComp
	})
	var walk func(c *cobra.Command)
	walk = func(c *cobra.Command) {
		if c.ValidArgsFunction == nil && strings.Contains(c.Use, "ID") {
			c.ValidArgsFunction = a.completeScanIDs
		}
		for _, sub := range c.Commands() {
			walk(sub)
		}
	}
	walk(root)
}

func fixed(values ...string) func(*cobra.Command, []string, string) ([]string, cobra.ShellCompDirective) {
	return func(*cobra.Command, []string, string) ([]string, cobra.ShellCompDirective) {
		return values, cobra.ShellCompDirectiveNoFileComp
	}
}

// completeScanIDs offers the newest scans' IDs, with state and label as descriptions.
func (a *app) completeScanIDs(cmd *cobra.Command, _ []string, prefix string) ([]string, cobra.ShellCompDirective) {
	scans := a.recentScans()
	var out []string
	for _, s := range scans {
		if strings.HasPrefix(s.ID, prefix) {
			out = append(out, s.ID+"\t"+string(s.State)+" "+s.Request.Label)
		}
	}
	return out, cobra.ShellCompDirectiveNoFileComp
}

// completeSeriesIDs offers the series of the newest scans.
func (a *app) completeSeriesIDs(cmd *cobra.Command, _ []string, prefix string) ([]string, cobra.ShellCompDirective) {
	seen := map[string]bool{}
	var out []string
	for _, s := range a.recentScans() {
		if s.SeriesID != "" && !seen[s.SeriesID] && strings.HasPrefix(s.SeriesID, prefix) {
			seen[s.SeriesID] = true
			out = append(out, s.SeriesID)
		}
	}
	return out, cobra.ShellCompDirectiveNoFileComp
}

// recentScans asks the daemon briefly; completion must never hang the shell.
func (a *app) recentScans() []client.Scan {
	if a.ctx == nil {
		a.ctx = context.Background()
	}
	c, err := a.connect()
	if err != nil {
		return nil
	}
	defer c.Close()
	ctx, cancel := context.WithTimeout(a.ctx, 2*time.Second)
	defer cancel()
	scans, _, err := c.List(ctx, client.ListOptions{PageSize: 50})
	if err != nil {
		return nil
	}
	return scans
}
