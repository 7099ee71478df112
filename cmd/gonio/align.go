package main

import (
	"fmt"
	"io"
	"strings"
	"time"

	"github.com/spf13/cobra"

	"goniod/client"
)

func (a *app) alignCommand() *cobra.Command {
	var o client.AlignOptions
	var kv, ma float64
	cmd := &cobra.Command{
		Use:   "align [--kv KV --ma MA] [--store]",
		Short: "Find the zero offsets of the detector and crystal axes (switches high voltage on)",
		Long: `Aligns the goniometer: the detector is scanned through the direct beam near 2θ = 0 (the crystal parallel
to the beam), then, with the detector at the corrected Bragg angle, the crystal is rocked through a reflection
of the anode's Kα1 line (second order when the axes reach it; the Kα doublet is then resolved). Each step is a
coarse search, then a fine scan that is fitted. The offsets are printed with their standard errors; --store
keeps them in the instrument configuration (in the data directory, so they survive a restart) and applies
them at once. The four scans are stored like any other, for inspection.

Refused while a scan runs or is paused; the queue waits for it. High voltage is switched on for it and off
afterwards. It takes about 150 dwell times plus the moves: minutes with the default 1 s dwell.`,
		Example: `  gonio align --kv 30 --ma 0.8
  gonio align --kv 30 --ma 0.8 --store
  gonio align --kv 30 --ma 0.8 --search 3 --dwell 2s --output json`,
		Args: cobra.NoArgs,
		RunE: func(cmd *cobra.Command, _ []string) error {
			kvSet, maSet := cmd.Flags().Changed("kv"), cmd.Flags().Changed("ma")
			if kvSet != maSet {
				return usageError("--kv and --ma go together (the tube needs both)")
			}
			if kvSet {
				o.Source = &client.Source{KV: kv, MA: ma}
			}
			c, err := a.connect()
			if err != nil {
				return err
			}
			defer c.Close()
			if a.output == outTable {
				fmt.Fprintln(a.stderr, "aligning: direct beam, then the rocking curve (high voltage on)…")
			}
			al, err := c.Align(a.ctx, o)
			if err != nil {
				return err
			}
			return writeAlignment(a.stdout, a.output, al)
		},
	}
	f := cmd.Flags()
	f.Float64Var(&kv, "kv", 0, "tube voltage for the alignment (default: the present setting); needs --ma")
	f.Float64Var(&ma, "ma", 0, "tube current for the alignment; needs --kv")
	f.DurationVar(&o.Dwell, "dwell", time.Second, "counting time per point of the fine scans (the coarse ones count a quarter)")
	f.Float64Var(&o.SearchDeg, "search", 1, "half-width in degrees of the coarse search around each axis's present zero (at most 5)")
	f.IntVar(&o.Order, "order", 0, "diffraction order of the reference reflection (0: the second when reachable, else the first)")
	f.BoolVar(&o.Store, "store", false, "store the offsets in the instrument configuration and apply them")
	return cmd
}

// writeAlignment renders an alignment result.
func writeAlignment(w io.Writer, format string, al client.Alignment) error {
	type offsetView struct {
		Axis        string  `json:"axis"`
		OffsetDeg   float64 `json:"offset_deg"`
		ErrDeg      float64 `json:"offset_err_deg"`
		PreviousDeg float64 `json:"previous_offset_deg"`
	}
	views := make([]offsetView, len(al.Offsets))
	for i, o := range al.Offsets {
		views[i] = offsetView{o.Axis, o.OffsetDeg, o.ErrDeg, o.PreviousDeg}
	}
	switch format {
	case outJSON:
		return writeJSON(w, struct {
			Offsets   []offsetView `json:"offsets"`
			Stored    bool         `json:"stored"`
			Reference string       `json:"reference"`
			ScanIDs   []string     `json:"scan_ids"`
		}{views, al.Stored, al.Reference, al.ScanIDs})
	case outCSV:
		rows := make([][]string, len(views))
		for i, v := range views {
			rows[i] = []string{v.Axis, num(v.OffsetDeg), num(v.ErrDeg), num(v.PreviousDeg)}
		}
		return writeCSV(w, []string{"axis", "offset_deg", "offset_err_deg", "previous_offset_deg"}, rows...)
	}
	fmt.Fprintf(w, "reference reflection: %s\n", al.Reference)
	fmt.Fprintf(w, "%-10s %10s %9s %10s %10s\n", "axis", "offset", "±", "before", "change")
	for _, v := range views {
		fmt.Fprintf(w, "%-10s %9.4f° %8.4f° %9.4f° %+9.4f°\n", v.Axis, v.OffsetDeg, v.ErrDeg, v.PreviousDeg, v.OffsetDeg-v.PreviousDeg)
	}
	if al.Stored {
		fmt.Fprintln(w, "stored in the instrument configuration and applied")
	} else {
		fmt.Fprintln(w, "not stored (run again with --store to apply them)")
	}
	_, err := fmt.Fprintf(w, "scans: %s\n", strings.Join(al.ScanIDs, " "))
	return err
}
