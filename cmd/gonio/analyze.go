package main

import (
	"fmt"
	"io"
	"text/tabwriter"

	"github.com/spf13/cobra"

	"goniod/client"
)

// analyzeFlags are the options of the analyze subcommands.
type analyzeFlags struct {
	axis, shape, anode, crystal string
	significance, tolerance     float64
	angleErr                    float64
	maxOrder                    int
	noSave, saved               bool
}

func (a *app) analyzeCommand() *cobra.Command {
	f := &analyzeFlags{}
	cmd := &cobra.Command{
		Use:   "analyze",
		Short: "Turn stored scans into physics: peaks, lines, lattice spacing, widths, short-wavelength limit",
		Long: `Runs an analysis on the daemon, where the points are. Each result is saved beside its scan (unless
--no-save) and can be shown again later with --saved. Uncertainties are one standard deviation; rates are
dead-time-corrected counts per second.`,
		Example: `  gonio analyze peaks scan-000001 --significance 5
  gonio analyze lines scan-000001 --output json
  gonio analyze lattice scan-000001 scan-000002 --angle-err 0.05
  gonio analyze width scan-000003 --shape pseudo-voigt
  gonio analyze limit scan-000004 scan-000005 scan-000006
  gonio analyze lines scan-000001 --saved`,
	}
	pf := cmd.PersistentFlags()
	pf.StringVar(&f.axis, "axis", "", "axis whose angle is the abscissa (peaks, width; default: the axis the scan moved)")
	pf.StringVar(&f.shape, "shape", "gaussian", "peak profile: gaussian, lorentzian or pseudo-voigt")
	pf.Float64Var(&f.significance, "significance", 0, "detection threshold in standard deviations (default 5)")
	pf.StringVar(&f.anode, "anode", "", "anode element (lines, lattice; default: the scan's)")
	pf.StringVar(&f.crystal, "crystal", "", "analyzer crystal, e.g. LiF (lines; default: the scan's)")
	pf.Float64Var(&f.tolerance, "tolerance", 0, "largest residual in degrees for a line match (default 0.15)")
	pf.IntVar(&f.maxOrder, "max-order", 0, "highest diffraction order tried (default: all the crystal reflects)")
	pf.Float64Var(&f.angleErr, "angle-err", 0, "angle uncertainty in degrees for the lattice fit (default 0.1)")
	pf.BoolVar(&f.noSave, "no-save", false, "do not save the result beside the scan")
	pf.BoolVar(&f.saved, "saved", false, "show the result saved by an earlier run instead of analysing again")
	cmd.AddCommand(
		a.analyzeOne("peaks", "Find and fit the peaks of each scan", client.PeaksResult, f),
		a.analyzeOne("lines", "Identify the emission lines and orders of each scan's peaks", client.LinesResult, f),
		a.analyzeOne("width", "Measure the width of each scan's strongest peak (rocking curve)", client.WidthResult, f),
		a.analyzeMany("lattice", "Fit the lattice spacing d from the identified lines of the scans", client.LatticeResult, f),
		a.analyzeMany("limit", "Short-wavelength limit of each scan (one per tube voltage) and Planck's constant", client.LimitResult, f),
	)
	return cmd
}

// analyzeOne is a subcommand that analyses each scan on its own.
func (a *app) analyzeOne(name, short string, kind client.ResultKind, f *analyzeFlags) *cobra.Command {
	return &cobra.Command{
		Use:     name + " ID...",
		Short:   short,
		Example: fmt.Sprintf("  gonio analyze %s scan-000001\n  gonio analyze %s scan-000001 --output json\n  gonio analyze %s scan-000001 --saved", name, name, name),
		Args:    cobra.MinimumNArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			if err := f.check(); err != nil {
				return err
			}
			c, err := a.connect()
			if err != nil {
				return err
			}
			defer c.Close()
			for _, id := range args {
				var r client.SavedResult
				if f.saved {
					r, err = c.SavedResult(a.ctx, id, kind)
				} else {
					r, err = f.run(a, c, kind, []string{id})
				}
				if err != nil {
					return fmt.Errorf("%s: %w", id, err)
				}
				if err := a.showResult(r); err != nil {
					return err
				}
			}
			return nil
		},
	}
}

// analyzeMany is a subcommand that analyses all its scans together.
func (a *app) analyzeMany(name, short string, kind client.ResultKind, f *analyzeFlags) *cobra.Command {
	return &cobra.Command{
		Use:     name + " ID...",
		Short:   short,
		Example: fmt.Sprintf("  gonio analyze %s scan-000001\n  gonio analyze %s scan-000001 --output json\n  gonio analyze %s scan-000001 --saved", name, name, name),
		Args:    cobra.MinimumNArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			if err := f.check(); err != nil {
				return err
			}
			c, err := a.connect()
			if err != nil {
				return err
			}
			defer c.Close()
			var r client.SavedResult
			if f.saved {
				r, err = c.SavedResult(a.ctx, args[0], kind)
			} else {
				r, err = f.run(a, c, kind, args)
			}
			if err != nil {
				return err
			}
			return a.showResult(r)
		},
	}
}

func (f *analyzeFlags) check() error {
	switch f.shape {
	case "gaussian", "lorentzian", "pseudo-voigt":
	default:
		return usageError("--shape %q: use gaussian, lorentzian or pseudo-voigt", f.shape)
	}
	if f.maxOrder < 0 || f.maxOrder > 20 {
		return usageError("--max-order %d: must be 0..20", f.maxOrder)
	}
	return nil
}

// run calls the daemon for one kind of analysis.
func (f *analyzeFlags) run(a *app, c *client.Client, kind client.ResultKind, ids []string) (client.SavedResult, error) {
	save := !f.noSave
	out := client.SavedResult{ScanID: ids[0], Kind: kind}
	po := client.PeakOptions{Axis: f.axis, Significance: f.significance, Shape: client.Shape(f.shape), Save: save}
	var err error
	switch kind {
	case client.PeaksResult:
		var r client.Peaks
		r, err = c.FindPeaks(a.ctx, ids[0], po)
		out.Peaks = &r
	case client.LinesResult:
		var r client.Lines
		r, err = c.IdentifyLines(a.ctx, ids[0], client.LineOptions{Anode: f.anode, Crystal: f.crystal,
			ToleranceDeg: f.tolerance, MaxOrder: f.maxOrder, Significance: f.significance, Save: save})
		out.Lines = &r
	case client.WidthResult:
		var r client.Width
		r, err = c.MeasureWidth(a.ctx, ids[0], po)
		out.Width = &r
	case client.LatticeResult:
		var r client.Lattice
		r, err = c.FitLattice(a.ctx, ids, nil, client.LatticeOptions{Anode: f.anode, AngleErrDeg: f.angleErr, Save: save})
		out.Lattice = &r
	case client.LimitResult:
		var r client.Limits
		r, err = c.FitLimit(a.ctx, ids, save)
		out.Limits = &r
	}
	return out, err
}

func (a *app) showResult(r client.SavedResult) error { return writeResult(a.stdout, a.output, r) }

// writeResult renders an analysis result as a table, one JSON object, or CSV.
func writeResult(w io.Writer, format string, r client.SavedResult) error {
	switch format {
	case outJSON:
		return writeJSON(w, r)
	case outCSV:
		return writeResultCSV(w, r)
	}
	tw := tabwriter.NewWriter(w, 0, 4, 2, ' ', 0)
	switch {
	case r.Peaks != nil:
		fmt.Fprintf(tw, "scan %s, axis %s, %s profiles: %d peaks\n", r.ScanID, r.Peaks.Axis, r.Peaks.Shape, len(r.Peaks.Peaks))
		fmt.Fprintln(tw, "centre (°)\tFWHM (°)\tarea (cps·°)\theight (cps)\tσ\tχ²ν\tλ (nm)\tE (keV)")
		for _, p := range r.Peaks.Peaks {
			peakRow(tw, p)
		}
	case r.Lines != nil:
		fmt.Fprintf(tw, "scan %s, anode %s, d = %.6f nm: %d lines, %d peaks unmatched\n", r.ScanID, r.Lines.Anode,
			r.Lines.CrystalDNM, len(r.Lines.Matches), len(r.Lines.Unmatched))
		fmt.Fprintln(tw, "line\tcentre (°)\texpected (°)\tresidual (°)\tE (keV)")
		for _, m := range r.Lines.Matches {
			fmt.Fprintf(tw, "%s, n = %d\t%s\t%.4f\t%+.4f\t%.4f\n", m.Line, m.Order, pm(m.Peak.CentreDeg, 4), m.ExpectedDeg,
				m.ResidualDeg, m.LineEnergyKeV)
		}
		for _, p := range r.Lines.Unmatched {
			fmt.Fprintf(tw, "unmatched\t%s\t\t\t\n", pm(p.CentreDeg, 4))
		}
	case r.Width != nil:
		w := r.Width
		fmt.Fprintf(tw, "scan %s, axis %s\n", r.ScanID, w.Axis)
		fmt.Fprintf(tw, "centre\t%s °\n", pm(w.CentreDeg, 4))
		fmt.Fprintf(tw, "FWHM by fit\t%s °\t(χ²ν %.2f)\n", pm(w.FWHMFitDeg, 4), w.ReducedChi2)
		fmt.Fprintf(tw, "FWHM by interpolation\t%s °\n", pm(w.FWHMInterpDeg, 4))
	case r.Lattice != nil:
		l := r.Lattice
		fmt.Fprintf(tw, "d = %s nm from %d reflections (χ²ν %.2f)\n", pm(l.DNM, 6), len(l.Used), l.ReducedChi2)
		fmt.Fprintln(tw, "θ (°)\tn\tλ (nm)\tresidual nλ/2 − d sin θ (nm)")
		for k, u := range l.Used {
			fmt.Fprintf(tw, "%.4f\t%d\t%.6f\t%+.2e\n", u.ThetaDeg, u.Order, u.WavelengthNM, l.ResidualsNM[k])
		}
	case r.Limits != nil:
		fmt.Fprintln(tw, "scan\tU (kV)\tλmin (nm)\tθ (°)")
		for _, l := range r.Limits.Limits {
			fmt.Fprintf(tw, "%s\t%.2f\t%s\t%s\n", l.ScanID, l.KV, pm(l.WavelengthNM, 5), pm(l.ThetaDeg, 3))
		}
		if h := r.Limits.PlanckJs; h != nil {
			fmt.Fprintf(tw, "Planck's constant h = (%.4f ± %.4f)e-34 J s (χ²ν %.2f)\n", h.Value*1e34, h.Err*1e34, r.Limits.ReducedChi2)
		}
	}
	return tw.Flush()
}

func peakRow(w io.Writer, p client.Peak) {
	wl, e := "", ""
	if p.WavelengthNM > 0 {
		wl, e = fmt.Sprintf("%.5f", p.WavelengthNM), fmt.Sprintf("%.4f", p.EnergyKeV)
	}
	fmt.Fprintf(w, "%s\t%s\t%s\t%.4g\t%.1f\t%.2f\t%s\t%s\n", pm(p.CentreDeg, 4), pm(p.FWHMDeg, 4), pm(p.Area, 3),
		p.Height, p.Significance, p.ReducedChi2, wl, e)
}

// pm formats a value with its error to the given number of decimals.
func pm(v client.Value, decimals int) string {
	return fmt.Sprintf("%.*f ± %.*f", decimals, v.Value, decimals, v.Err)
}
