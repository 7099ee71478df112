package main

import (
	"fmt"
	"io"
	"strings"

	"github.com/spf13/cobra"

	"goniod/client"
)

func (a *app) fetchCommand() *cobra.Command {
	var format, out, split string
	cmd := &cobra.Command{
		Use:   "fetch ID",
		Short: "Write a scan's (or a series') stored points as CSV or JSON lines",
		Long: `Writes every stored point of a scan, to stdout or to a file (-o). CSV has a header row; its columns are
index, time, <axis>_deg (read-back) and <axis>_set_deg (requested) for every axis, dwell_s, counts, rate_cps,
rate_err_cps, corrected_rate_cps, corrected_rate_err_cps, tube_kv, tube_ma, wavelength_nm, energy_kev.
JSON writes one object per point and line with the same names as keys.

Given a series ID, it writes the points of all the series' scans as one table with a leading scan_id column
(tube_kv and tube_ma tell the settings apart), or with --split DIR one file per scan, DIR/<scan ID>.csv.`,
		Example: `  gonio fetch scan-000001 --format csv -o lif-30kv.csv
  gonio fetch scan-000001 --format json | head
  gonio fetch series-000001 -o kv-series.csv
  gonio fetch series-000001 --split kv-series/`,
		Args: cobra.ExactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			if format == "" {
				format = outCSV
				if a.output == outJSON {
					format = outJSON
				}
			}
			if format != "csv" && format != "json" {
				return usageError("--format %q: use csv or json", format)
			}
			c, err := a.connect()
			if err != nil {
				return err
			}
			defer c.Close()
			fetch := c.Fetch
			if strings.HasPrefix(args[0], client.SeriesIDPrefix) {
				if split != "" {
					return a.fetchSeriesSplit(c, args[0], client.Format(format), split)
				}
				fetch = c.FetchSeries
			} else if split != "" {
				return usageError("--split applies to a series ID (series-…), not %q", args[0])
			}
			if out == "" || out == "-" {
				_, err = fetch(a.ctx, args[0], client.Format(format), a.stdout)
				return err
			}
			var n int
			err = writeFileAtomic(out, func(w io.Writer) error {
				n, err = fetch(a.ctx, args[0], client.Format(format), w)
				return err
			})
			if err != nil {
				return err
			}
			fmt.Fprintf(a.stderr, "%d points written to %s\n", n, out)
			return nil
		},
	}
	cmd.Flags().StringVar(&format, "format", "", "csv or json (default: json with --output json, else csv)")
	cmd.Flags().StringVarP(&out, "out", "o", "", "write to this file instead of stdout")
	cmd.Flags().StringVar(&split, "split", "", "for a series: write one file per scan into this `directory`")
	return cmd
}
