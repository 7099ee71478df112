package main

import (
	"fmt"
	"io"
	"os"
	"path/filepath"

	"github.com/spf13/cobra"

	"goniod/client"
)

func (a *app) fetchCommand() *cobra.Command {
	var format, out string
	cmd := &cobra.Command{
		Use:   "fetch ID",
		Short: "Write a scan's stored points as CSV or JSON lines",
		Long: `Writes every stored point of a scan, to stdout or to a file (-o). CSV has a header row; its columns are
index, time, <axis>_deg (read-back) and <axis>_set_deg (requested) for every axis, dwell_s, counts, rate_cps,
rate_err_cps, corrected_rate_cps, corrected_rate_err_cps, tube_kv, tube_ma, wavelength_nm, energy_kev.
JSON writes one object per point and line with the same names as keys.`,
		Example: `  gonio fetch scan-000001 --format csv -o lif-30kv.csv
  gonio fetch scan-000001 --format json | head`,
		Args: cobra.ExactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			if format != "csv" && format != "json" {
				return usageError("--format %q: use csv or json", format)
			}
			c, err := a.connect()
			if err != nil {
				return err
			}
			defer c.Close()
			var w io.Writer = a.stdout
			var tmp *os.File
			if out != "" && out != "-" {
				// Write beside the target and rename, so a failed fetch never leaves a partial file behind.
				tmp, err = os.CreateTemp(filepath.Dir(out), "."+filepath.Base(out)+".part*")
				if err != nil {
					return err
				}
				defer os.Remove(tmp.Name())
				w = tmp
			}
			n, err := c.Fetch(a.ctx, args[0], client.Format(format), w)
			if err != nil {
				if tmp != nil {
					tmp.Close()
				}
				return err
			}
			if tmp != nil {
				if err := tmp.Close(); err != nil {
					return err
				}
				if err := os.Rename(tmp.Name(), out); err != nil {
					return err
				}
				fmt.Fprintf(a.stderr, "%d points written to %s\n", n, out)
			}
			return nil
		},
	}
	cmd.Flags().StringVar(&format, "format", "csv", "csv or json")
	cmd.Flags().StringVarP(&out, "out", "o", "", "write to this file instead of stdout")
	return cmd
}
