package main

import (
	"errors"
	"fmt"
	"io"
	"path/filepath"
	"slices"
	"strings"

	"github.com/spf13/cobra"
	"gonum.org/v1/plot/vg"

	"goniod/client"
)

// plotFlags are the options of gonio plot.
type plotFlags struct {
	out, x, y, title, annotate, crystal string
	log, noErrors                       bool
	widthCM, heightCM                   float64
}

func (a *app) plotCommand() *cobra.Command {
	f := &plotFlags{}
	cmd := &cobra.Command{
		Use:   "plot ID... -o FILE.svg|png|pdf",
		Short: "Draw scans to an SVG, PNG or PDF file: overlaid, with error bars and the identified lines",
		Long: `Draws the points of one or more stored scans into one figure, one colour and legend entry per scan (a
tube-voltage series overlays naturally). The abscissa is an axis angle, the first-order wavelength or the photon
energy (--x); the ordinate is the count rate, the counts per point or the dead-time-corrected rate (--y), on a
linear or logarithmic scale (--log). Error bars are one Poisson standard deviation. Peaks are annotated with the
emission lines the daemon identifies (--annotate lines), or with their angles (peaks), or not at all (none).
The title says what the scans are, from their label, tube settings, anode and crystal (or --title).`,
		Example: `  gonio plot scan-000001 -o lif-30kv.svg
  gonio plot scan-000002 scan-000003 scan-000004 --x energy --log -o voltage-series.png
  gonio plot scan-000005 --x theta --y counts --annotate peaks -o rocking-curve.pdf`,
		Args: cobra.MinimumNArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error { return a.plot(args, f) },
	}
	fs := cmd.Flags()
	fs.StringVarP(&f.out, "out", "o", "", "output file; its extension picks the format: .svg, .png or .pdf (required)")
	fs.StringVarP(&f.x, "x", "x", "", "abscissa: an axis (theta, twotheta, …), wavelength, energy or index (default: the axis the scan moved)")
	fs.StringVarP(&f.y, "y", "y", yRate, "ordinate: rate (counts/s), counts (per point) or corrected (dead-time-corrected rate)")
	fs.BoolVar(&f.log, "log", false, "logarithmic ordinate")
	fs.BoolVar(&f.noErrors, "no-errors", false, "leave out the error bars")
	fs.StringVar(&f.annotate, "annotate", "lines", "peak labels: lines (identified emission lines), peaks (angles) or none")
	fs.StringVar(&f.title, "title", "", "title (default: from the scans' metadata)")
	fs.StringVar(&f.crystal, "crystal", "", "crystal for wavelengths and energies when the scan's instrument has none, e.g. LiF")
	fs.Float64Var(&f.widthCM, "width", 18, "figure width, cm")
	fs.Float64Var(&f.heightCM, "height", 11, "figure height, cm")
	_ = cmd.MarkFlagRequired("out")
	_ = cmd.RegisterFlagCompletionFunc("x", fixed("theta", "twotheta", xWavelength, xEnergy, xIndex))
	_ = cmd.RegisterFlagCompletionFunc("y", fixed(yRate, yCounts, yCorrected))
	_ = cmd.RegisterFlagCompletionFunc("annotate", fixed("lines", "peaks", "none"))
	return cmd
}

func (f *plotFlags) check() (format string, err error) {
	format = strings.TrimPrefix(strings.ToLower(filepath.Ext(f.out)), ".")
	if !slices.Contains([]string{"svg", "png", "pdf"}, format) {
		return "", usageError("-o %q: the file name must end in .svg, .png or .pdf", f.out)
	}
	if !slices.Contains([]string{yRate, yCounts, yCorrected}, f.y) {
		return "", usageError("--y %q: use rate, counts or corrected", f.y)
	}
	if !slices.Contains([]string{"lines", "peaks", "none"}, f.annotate) {
		return "", usageError("--annotate %q: use lines, peaks or none", f.annotate)
	}
	if f.widthCM < 4 || f.widthCM > 200 || f.heightCM < 3 || f.heightCM > 200 {
		return "", usageError("--width %g, --height %g: the figure must be 4–200 cm wide and 3–200 cm high", f.widthCM, f.heightCM)
	}
	return format, nil
}

func (a *app) plot(ids []string, f *plotFlags) error {
	format, err := f.check()
	if err != nil {
		return err
	}
	c, err := a.connect()
	if err != nil {
		return err
	}
	defer c.Close()
	scans := make([]figureScan, 0, len(ids))
	for _, id := range ids {
		s, err := a.loadScan(c, id, f)
		if err != nil {
			return err
		}
		scans = append(scans, s)
	}
	o := figureOptions{x: f.x, y: f.y, log: f.log, errors: !f.noErrors, title: f.title}
	if o.x == "" {
		o.x = movedAxis(scans[0].scan)
	}
	p, err := buildFigure(scans, o)
	if err != nil {
		return err
	}
	wt, err := p.WriterTo(vg.Length(f.widthCM)*vg.Centimeter, vg.Length(f.heightCM)*vg.Centimeter, format)
	if err != nil {
		return err
	}
	if err := writeFileAtomic(f.out, func(w io.Writer) error { _, err := wt.WriteTo(w); return err }); err != nil {
		return err
	}
	what := "1 scan"
	if len(scans) > 1 {
		what = fmt.Sprintf("%d scans", len(scans))
	}
	fmt.Fprintf(a.stderr, "%s drawn to %s\n", what, f.out)
	return nil
}

// movedAxis is the axis a scan stepped (the crystal axis of a coupled scan); timed and list scans plot by index.
func movedAxis(s client.Scan) string {
	switch s.Request.Kind {
	case client.Coupled:
		if s.Request.Axis != "" {
			return s.Request.Axis
		}
		if len(s.Info.Axes) > 0 {
			return s.Info.Axes[0]
		}
		return "theta"
	case client.Axis:
		return s.Request.Axis
	}
	return xIndex
}

// loadScan reads a scan's record and points, converts angles when the scan has no wavelengths, and asks the
// daemon for its peaks.
func (a *app) loadScan(c *client.Client, id string, f *plotFlags) (figureScan, error) {
	s, err := c.Scan(a.ctx, id)
	if err != nil {
		return figureScan{}, fmt.Errorf("%s: %w", id, err)
	}
	st, err := c.Points(a.ctx, id, 0, 0)
	if err != nil {
		return figureScan{}, fmt.Errorf("%s: %w", id, err)
	}
	out := figureScan{scan: s}
	for p := range st.C {
		out.points = append(out.points, p)
	}
	if err := st.Err(); err != nil {
		return figureScan{}, fmt.Errorf("%s: %w", id, err)
	}
	if len(out.points) == 0 {
		return figureScan{}, withCode(exitNotFound, fmt.Errorf("%s has no points yet", id))
	}
	if (f.x == xWavelength || f.x == xEnergy) && out.points[0].WavelengthNM == 0 {
		if err := a.convertScan(c, &out, f); err != nil {
			return figureScan{}, err
		}
	}
	if f.x != "" && f.x != xWavelength && f.x != xEnergy && f.x != xIndex && !slices.Contains(s.Info.Axes, f.x) {
		return figureScan{}, usageError("--x %q: scan %s has the axes %s; or use wavelength, energy or index", f.x, id,
			strings.Join(s.Info.Axes, ", "))
	}
	out.marks = a.peakMarks(c, s, f.annotate)
	return out, nil
}

// convertScan asks the daemon for the wavelengths or energies of a scan taken without a known crystal.
func (a *app) convertScan(c *client.Client, s *figureScan, f *plotFlags) error {
	if f.crystal == "" {
		return usageError("scan %s has no wavelengths (its instrument has no crystal configured): give --crystal", s.scan.ID)
	}
	axis := movedAxis(s.scan)
	thetas := make([]float64, len(s.points))
	for i, p := range s.points {
		th, ok := p.Angle(axis)
		if !ok {
			return fmt.Errorf("scan %s: point %d has no %s angle", s.scan.ID, p.Index, axis)
		}
		thetas[i] = th
	}
	r, err := c.ConvertAngles(a.ctx, thetas, client.ConvertOptions{Crystal: f.crystal})
	if err != nil {
		return fmt.Errorf("scan %s: %w", s.scan.ID, err)
	}
	if len(r.Points) != len(thetas) {
		return fmt.Errorf("scan %s: %d angles converted of %d", s.scan.ID, len(r.Points), len(thetas))
	}
	s.xs = make([]float64, len(thetas))
	for i, cv := range r.Points {
		s.xs[i] = cv.WavelengthNM
		if f.x == xEnergy {
			s.xs[i] = cv.EnergyKeV
		}
	}
	return nil
}

// peakMarks asks the daemon for the scan's identified lines (or peaks); a scan the analysis cannot handle is
// drawn without marks and a note on stderr.
func (a *app) peakMarks(c *client.Client, s client.Scan, annotate string) []peakMark {
	if annotate == "none" || s.Request.Kind == client.Timed || s.Request.Kind == client.List {
		return nil
	}
	axis := movedAxis(s)
	var marks []peakMark
	if annotate == "lines" {
		r, err := c.IdentifyLines(a.ctx, s.ID, client.LineOptions{})
		if err == nil {
			for _, m := range r.Matches {
				marks = append(marks, peakMark{angleDeg: m.Peak.CentreDeg.Value, axis: axis, anode: r.Anode, line: m.Line, order: m.Order})
			}
			for _, p := range r.Unmatched {
				marks = append(marks, peakMark{angleDeg: p.CentreDeg.Value, axis: axis})
			}
			return marks
		}
		if !errors.Is(err, client.ErrInvalid) && !errors.Is(err, client.ErrRefused) {
			fmt.Fprintf(a.stderr, "gonio: %s: no line labels: %v\n", s.ID, err)
			return nil
		}
	}
	r, err := c.FindPeaks(a.ctx, s.ID, client.PeakOptions{Axis: axis})
	if err != nil {
		fmt.Fprintf(a.stderr, "gonio: %s: no peak labels: %v\n", s.ID, err)
		return nil
	}
	for _, p := range r.Peaks {
		marks = append(marks, peakMark{angleDeg: p.CentreDeg.Value, axis: r.Axis})
	}
	return marks
}
