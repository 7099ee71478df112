package main

import (
	"fmt"
	"strconv"
	"strings"
	"time"

	"github.com/spf13/cobra"
	"github.com/spf13/pflag"

	"goniod/client"
)

// scanFlags are the options every scan kind shares.
type scanFlags struct {
	dwell           time.Duration
	precision       float64
	kv, ma          float64
	seriesKV        []float64
	settle          time.Duration
	keepHV          bool
	label, operator string
	note            string
	detach          bool
}

func (f *scanFlags) register(fs *pflag.FlagSet) {
	fs.DurationVar(&f.dwell, "dwell", time.Second, "counting time per point (with --precision: the longest)")
	fs.Float64Var(&f.precision, "precision", 0, "count each point until its relative Poisson error reaches this (e.g. 0.01), at most --dwell")
	fs.Float64Var(&f.kv, "kv", 0, "tube voltage for the scan (switches high voltage on); needs --ma")
	fs.Float64Var(&f.ma, "ma", 0, "tube current for the scan; needs --kv")
	fs.Float64SliceVar(&f.seriesKV, "series-kv", nil, "run a tube-voltage series: one scan per voltage, e.g. 12,15,20,25,30 (needs --ma)")
	fs.DurationVar(&f.settle, "settle", 0, "wait after setting the tube before the first point")
	fs.BoolVar(&f.keepHV, "keep-hv", false, "leave high voltage on when the scan (or series) ends")
	fs.StringVar(&f.label, "label", "", "sample or crystal label stored with the scan")
	fs.StringVar(&f.operator, "operator", "", "operator's name stored with the scan")
	fs.StringVar(&f.note, "note", "", "free-text note stored with the scan")
	fs.BoolVar(&f.detach, "detach", false, "print the scan ID and return at once instead of following the scan")
}

// apply fills the shared part of a request.
func (f *scanFlags) apply(cmd *cobra.Command, r *client.ScanRequest) error {
	r.Dwell, r.RelativeError, r.Settle, r.KeepHighVoltage = f.dwell, f.precision, f.settle, f.keepHV
	r.Label, r.Operator, r.Note = f.label, f.operator, f.note
	kvSet, maSet := cmd.Flags().Changed("kv"), cmd.Flags().Changed("ma")
	if kvSet != maSet && len(f.seriesKV) == 0 {
		return usageError("--kv and --ma go together (the tube needs both)")
	}
	if kvSet && maSet {
		r.Source = &client.Source{KV: f.kv, MA: f.ma}
	}
	if len(f.seriesKV) > 0 && !maSet {
		return usageError("--series-kv needs --ma")
	}
	return nil
}

// submit sends the request (or a series) and follows it unless detached.
func (a *app) submit(cmd *cobra.Command, f *scanFlags, r client.ScanRequest) error {
	c, err := a.connect()
	if err != nil {
		return err
	}
	defer c.Close()
	if len(f.seriesKV) > 0 {
		sr := client.SeriesRequest{Scan: r, Settle: f.settle, KeepHighVoltage: f.keepHV}
		sr.Scan.Source = nil
		for _, kv := range f.seriesKV {
			sr.Sources = append(sr.Sources, client.Source{KV: kv, MA: f.ma})
		}
		s, err := c.SubmitSeries(a.ctx, sr)
		if err != nil {
			return err
		}
		if a.output == "json" {
			if err := a.printJSON(map[string]any{"series_id": s.ID, "scan_ids": s.ScanIDs}); err != nil {
				return err
			}
		} else {
			fmt.Fprintf(a.stderr, "series %s: %d scans\n", s.ID, len(s.ScanIDs))
			fmt.Fprintln(a.stdout, strings.Join(s.ScanIDs, "\n"))
		}
		if f.detach {
			return nil
		}
		for _, id := range s.ScanIDs {
			if err := a.follow(c, id, viewProgress); err != nil {
				return err
			}
		}
		return nil
	}
	s, err := c.Submit(a.ctx, r)
	if err != nil {
		return err
	}
	if a.output == "json" {
		if err := a.printJSON(map[string]any{"id": s.ID, "state": s.State, "points_total": s.PointsTotal}); err != nil {
			return err
		}
	} else {
		fmt.Fprintln(a.stdout, s.ID)
	}
	if f.detach {
		return nil
	}
	return a.follow(c, s.ID, viewProgress)
}

func (a *app) scanCommand() *cobra.Command {
	cmd := &cobra.Command{
		Use:   "scan",
		Short: "Submit a scan: coupled (θ–2θ), axis (rocking curve, detector scan), timed or list",
		Long: `Submit a scan to the queue and follow it with a progress line until it ends (or return at once with
--detach, printing only the scan ID). Angles are in degrees; durations like 1s, 500ms, 2m.`,
		Example: `  gonio scan coupled --from 10 --to 55 --step 0.1 --dwell 1s --kv 30 --ma 0.8
  gonio scan axis theta --from 21.5 --to 23.5 --step 0.01 --dwell 2s
  gonio scan timed --points 60 --dwell 10s
  gonio scan list --at theta=22.5,twotheta=45 --at theta=20.2,twotheta=40.4 --dwell 5s`,
	}
	cmd.AddCommand(a.scanCoupledCommand(), a.scanAxisCommand(), a.scanTimedCommand(), a.scanListCommand())
	return cmd
}

func (a *app) scanCoupledCommand() *cobra.Command {
	var f scanFlags
	var from, to, step float64
	var lead string
	cmd := &cobra.Command{
		Use:   "coupled --from DEG --to DEG --step DEG",
		Short: "θ–2θ scan: the crystal steps, the detector follows at twice the angle",
		Long: `A coupled scan steps the lead axis (theta unless --lead says otherwise) from --from to --to; the other
coupled axes follow at their configured ratios (twotheta = 2·theta). The end is included when it falls on a step.`,
		Example: `  gonio scan coupled --from 10 --to 30 --step 0.1 --dwell 1s
  gonio scan coupled --from 10 --to 55 --step 0.05 --dwell 2s --kv 30 --ma 0.8 --label "LiF batch 7"
  gonio scan coupled --from 18 --to 30 --step 0.1 --series-kv 12,15,20,25,30 --ma 0.8`,
		Args: cobra.NoArgs,
		RunE: func(cmd *cobra.Command, _ []string) error {
			r := client.ScanRequest{Kind: client.Coupled, Axis: lead, From: from, To: to, Step: step}
			if err := f.apply(cmd, &r); err != nil {
				return err
			}
			return a.submit(cmd, &f, r)
		},
	}
	cmd.Flags().Float64Var(&from, "from", 0, "first angle of the lead axis, degrees")
	cmd.Flags().Float64Var(&to, "to", 0, "last angle of the lead axis, degrees")
	cmd.Flags().Float64Var(&step, "step", 0, "step of the lead axis, degrees (> 0)")
	cmd.Flags().StringVar(&lead, "lead", "", "lead axis the range refers to (default: the instrument's, theta)")
	f.register(cmd.Flags())
	for _, n := range []string{"from", "to", "step"} {
		_ = cmd.MarkFlagRequired(n)
	}
	return cmd
}

func (a *app) scanAxisCommand() *cobra.Command {
	var f scanFlags
	var from, to, step float64
	cmd := &cobra.Command{
		Use:   "axis AXIS --from DEG --to DEG --step DEG",
		Short: "Single-axis scan: one axis moves, the others stay (rocking curve, detector scan)",
		Example: `  gonio move twotheta 45.0 && gonio scan axis theta --from 21.5 --to 23.5 --step 0.01 --dwell 2s
  gonio scan axis twotheta --from -2 --to 2 --step 0.02 --dwell 1s`,
		Args: cobra.ExactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			r := client.ScanRequest{Kind: client.Axis, Axis: args[0], From: from, To: to, Step: step}
			if err := f.apply(cmd, &r); err != nil {
				return err
			}
			return a.submit(cmd, &f, r)
		},
	}
	cmd.Flags().Float64Var(&from, "from", 0, "first angle, degrees")
	cmd.Flags().Float64Var(&to, "to", 0, "last angle, degrees")
	cmd.Flags().Float64Var(&step, "step", 0, "step, degrees (> 0)")
	f.register(cmd.Flags())
	for _, n := range []string{"from", "to", "step"} {
		_ = cmd.MarkFlagRequired(n)
	}
	return cmd
}

func (a *app) scanTimedCommand() *cobra.Command {
	var f scanFlags
	var points int
	var at string
	cmd := &cobra.Command{
		Use:   "timed --points N",
		Short: "Count repeatedly at one position (stability, warm-up drift)",
		Example: `  gonio scan timed --points 60 --dwell 10s
  gonio scan timed --points 100 --dwell 1s --at theta=22.5,twotheta=45`,
		Args: cobra.NoArgs,
		RunE: func(cmd *cobra.Command, _ []string) error {
			pos, err := parsePosition(at)
			if err != nil {
				return err
			}
			r := client.ScanRequest{Kind: client.Timed, Points: points, At: pos}
			if err := f.apply(cmd, &r); err != nil {
				return err
			}
			return a.submit(cmd, &f, r)
		},
	}
	cmd.Flags().IntVar(&points, "points", 0, "number of points")
	cmd.Flags().StringVar(&at, "at", "", "position to move to first, e.g. theta=22.5,twotheta=45 (default: stay)")
	f.register(cmd.Flags())
	_ = cmd.MarkFlagRequired("points")
	return cmd
}

func (a *app) scanListCommand() *cobra.Command {
	var f scanFlags
	var at []string
	cmd := &cobra.Command{
		Use:     "list --at POSITION [--at POSITION]…",
		Short:   "Visit explicit positions in order",
		Example: `  gonio scan list --at theta=22.5,twotheta=45 --at theta=20.2,twotheta=40.4 --dwell 5s`,
		Args:    cobra.NoArgs,
		RunE: func(cmd *cobra.Command, _ []string) error {
			r := client.ScanRequest{Kind: client.List}
			for _, s := range at {
				pos, err := parsePosition(s)
				if err != nil {
					return err
				}
				r.Positions = append(r.Positions, pos)
			}
			if err := f.apply(cmd, &r); err != nil {
				return err
			}
			return a.submit(cmd, &f, r)
		},
	}
	cmd.Flags().StringArrayVar(&at, "at", nil, "one position, e.g. theta=22.5,twotheta=45 (repeat for each point)")
	f.register(cmd.Flags())
	_ = cmd.MarkFlagRequired("at")
	return cmd
}

// parsePosition reads "axis=deg,axis=deg".
func parsePosition(s string) (map[string]float64, error) {
	if strings.TrimSpace(s) == "" {
		return nil, nil
	}
	out := map[string]float64{}
	for _, part := range strings.Split(s, ",") {
		name, val, ok := strings.Cut(strings.TrimSpace(part), "=")
		if !ok || name == "" {
			return nil, usageError("position %q: write axis=degrees, e.g. theta=22.5", part)
		}
		v, err := strconv.ParseFloat(val, 64)
		if err != nil {
			return nil, usageError("position %q: %q is not a number of degrees", part, val)
		}
		out[name] = v
	}
	return out, nil
}
