package main

import (
	"fmt"
	"math"
	"slices"
	"sort"
	"strings"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/plotutil"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"

	"goniod/client"
)

// Abscissas of a plot besides the scan's axes.
const (
	xWavelength = "wavelength"
	xEnergy     = "energy"
	xIndex      = "index"
)

// Ordinates of a plot.
const (
	yCounts    = "counts"
	yRate      = "rate"
	yCorrected = "corrected"
)

// figureScan is one scan's data for a figure.
type figureScan struct {
	scan   client.Scan
	points []client.Point
	// xs replaces the points' abscissa when set (wavelengths or energies converted by the daemon).
	xs    []float64
	marks []peakMark
}

// peakMark is a peak to annotate: its abscissa on the scan's analysis axis, and the text.
type peakMark struct {
	angleDeg float64 // peak centre on axis
	axis     string
	anode    string
	line     string // emission line; empty for an unidentified peak
	order    int
}

// figureOptions steer a figure.
type figureOptions struct {
	x, y   string
	log    bool
	errors bool
	title  string
}

// xLabel is the abscissa's label with its unit.
func xLabel(x string) string {
	switch x {
	case "theta":
		return "crystal angle θ (°)"
	case "twotheta":
		return "detector angle 2θ (°)"
	case xWavelength:
		return "wavelength λ (nm, first order)"
	case xEnergy:
		return "photon energy E (keV, first order)"
	case xIndex:
		return "point number"
	}
	return x + " angle (°)"
}

func yLabel(y string) string {
	switch y {
	case yCounts:
		return "counts per point"
	case yCorrected:
		return "dead-time-corrected count rate (counts/s)"
	}
	return "count rate (counts/s)"
}

// pointX is a point's abscissa.
func pointX(p client.Point, x string) (float64, bool) {
	switch x {
	case xWavelength:
		return p.WavelengthNM, p.WavelengthNM > 0
	case xEnergy:
		return p.EnergyKeV, p.EnergyKeV > 0
	case xIndex:
		return float64(p.Index), true
	}
	return p.Angle(x)
}

// pointY is a point's ordinate and its standard error.
func pointY(p client.Point, y string) (float64, float64) {
	switch y {
	case yCounts:
		return float64(p.Counts), math.Sqrt(float64(p.Counts)) // Poisson: σ = √N (common practice)
	case yCorrected:
		return p.CorrectedRate, p.CorrectedRateErr
	}
	return p.Rate, p.RateErr
}

// xyErrs is a series with its errors, for gonum's plotters.
type xyErrs struct {
	plotter.XYs
	plotter.YErrors
}

// series turns a scan into plottable values; on a log scale points at or below zero are left out and error
// bars are cut above zero.
func (s figureScan) series(o figureOptions) (xyErrs, error) {
	var out xyErrs
	for i, p := range s.points {
		x, ok := pointX(p, o.x)
		if s.xs != nil {
			x, ok = s.xs[i], true
		}
		if !ok {
			return out, fmt.Errorf("scan %s has no %s at point %d", s.scan.ID, o.x, p.Index)
		}
		y, e := pointY(p, o.y)
		if o.log && y <= 0 {
			continue
		}
		lo := e
		if o.log {
			lo = math.Min(e, 0.9*y)
		}
		out.XYs = append(out.XYs, plotter.XY{X: x, Y: y})
		out.YErrors = append(out.YErrors, struct{ Low, High float64 }{lo, e})
	}
	if len(out.XYs) == 0 {
		return out, fmt.Errorf("scan %s has no points to plot", s.scan.ID)
	}
	return out, nil
}

// buildFigure draws the scans overlaid, one colour each with a legend entry, with error bars and the
// annotated peaks.
func buildFigure(scans []figureScan, o figureOptions) (*plot.Plot, error) {
	p := plot.New()
	p.Title.Text = o.title
	if p.Title.Text == "" {
		p.Title.Text = figureTitle(scans)
	}
	p.X.Label.Text, p.Y.Label.Text = xLabel(o.x), yLabel(o.y)
	if o.log {
		p.Y.Scale, p.Y.Tick.Marker = plot.LogScale{}, plot.LogTicks{Prec: -1}
	}
	p.Add(plotter.NewGrid())
	var marks []labelAt
	for i, s := range scans {
		data, err := s.series(o)
		if err != nil {
			return nil, err
		}
		line, err := plotter.NewLine(data.XYs)
		if err != nil {
			return nil, fmt.Errorf("scan %s: %w", s.scan.ID, err)
		}
		line.Color, line.Width = plotutil.Color(i), vg.Points(1)
		p.Add(line)
		p.Legend.Add(legendText(s.scan, scans), line)
		if o.errors {
			bars, err := plotter.NewYErrorBars(data)
			if err != nil {
				return nil, fmt.Errorf("scan %s: %w", s.scan.ID, err)
			}
			bars.Color, bars.CapWidth = plotutil.Color(i), vg.Points(2)
			p.Add(bars)
		}
		marks = append(marks, s.labels(data, o)...)
	}
	if err := addMarks(p, mergeMarks(marks)); err != nil {
		return nil, err
	}
	p.Legend.Top = true
	return p, nil
}

// labelAt is an annotation at a data point.
type labelAt struct {
	x, y  float64
	anode string
	lines []string
	order int
}

func (l labelAt) text() string {
	if len(l.lines) == 0 {
		return ""
	}
	s := strings.TrimSpace(l.anode + " " + strings.Join(l.lines, "/"))
	if l.order > 1 {
		s += fmt.Sprintf(", n = %d", l.order)
	}
	return s
}

// labels places the scan's peak marks at the plotted point nearest each peak centre.
func (s figureScan) labels(data xyErrs, o figureOptions) []labelAt {
	var out []labelAt
	for _, m := range s.marks {
		best, bestD := -1, math.Inf(1)
		k := 0
		for _, p := range s.points {
			y, _ := pointY(p, o.y)
			if o.log && y <= 0 {
				continue
			}
			if a, ok := p.Angle(m.axis); ok && math.Abs(a-m.angleDeg) < bestD {
				best, bestD = k, math.Abs(a-m.angleDeg)
			}
			k++
		}
		if best < 0 {
			continue
		}
		l := labelAt{x: data.XYs[best].X, y: data.XYs[best].Y, anode: m.anode, order: m.order}
		if m.line != "" {
			l.lines = []string{m.line}
		} else {
			l.lines = []string{fmt.Sprintf("%.2f°", m.angleDeg)}
		}
		out = append(out, l)
	}
	return out
}

// mergeMarks keeps one label per text (the highest) and joins labels closer than 2 % of the abscissa range
// (Kα1 beside Kα2), so that a series does not repeat the same line five times.
func mergeMarks(marks []labelAt) []labelAt {
	byText := map[string]labelAt{}
	for _, m := range marks {
		if old, ok := byText[m.text()]; !ok || m.y > old.y {
			byText[m.text()] = m
		}
	}
	uniq := make([]labelAt, 0, len(byText))
	for _, m := range byText {
		uniq = append(uniq, m)
	}
	sort.Slice(uniq, func(i, j int) bool { return uniq[i].x < uniq[j].x })
	xmin, xmax := math.Inf(1), math.Inf(-1)
	for _, m := range uniq {
		xmin, xmax = math.Min(xmin, m.x), math.Max(xmax, m.x)
	}
	var out []labelAt
	for _, m := range uniq {
		if n := len(out); n > 0 {
			last := &out[n-1]
			span := math.Max(xmax-xmin, 1e-9)
			if math.Abs(m.x-last.x) < 0.02*span && m.anode == last.anode && m.order == last.order {
				for _, l := range m.lines {
					if !slices.Contains(last.lines, l) {
						last.lines = append(last.lines, l)
					}
				}
				if m.y > last.y {
					last.x, last.y = m.x, m.y
				}
				continue
			}
		}
		out = append(out, m)
	}
	return out
}

// addMarks draws a small triangle above each annotated peak with its text.
func addMarks(p *plot.Plot, marks []labelAt) error {
	if len(marks) == 0 {
		return nil
	}
	var xys plotter.XYLabels
	for _, m := range marks {
		xys.XYs = append(xys.XYs, plotter.XY{X: m.x, Y: m.y})
		xys.Labels = append(xys.Labels, m.text())
	}
	sc, err := plotter.NewScatter(xys.XYs)
	if err != nil {
		return err
	}
	sc.GlyphStyle.Shape, sc.GlyphStyle.Radius = draw.PyramidGlyph{}, vg.Points(2.5)
	labels, err := plotter.NewLabels(xys)
	if err != nil {
		return err
	}
	labels.Offset = vg.Point{X: vg.Points(-8), Y: vg.Points(5)}
	for i := range labels.TextStyle {
		labels.TextStyle[i].Font.Size = vg.Points(8)
	}
	p.Add(sc, labels)
	return nil
}

// figureTitle says what the scans are: their common label, the kind of scan or series, the anode and crystal.
func figureTitle(scans []figureScan) string {
	first := scans[0].scan
	var parts []string
	if l := commonLabel(scans); l != "" {
		parts = append(parts, l+":")
	}
	if len(scans) == 1 {
		parts = append(parts, kindText(first.Request))
		if src := first.Request.Source; src != nil {
			parts = append(parts, fmt.Sprintf("at %g kV, %g mA", src.KV, src.MA))
		}
	} else {
		parts = append(parts, seriesText(scans))
	}
	if first.Info.Anode != "" && first.Info.Crystal != "" {
		parts = append(parts, fmt.Sprintf("(%s anode, %s crystal)", first.Info.Anode, first.Info.Crystal))
	}
	return strings.Join(parts, " ")
}

func commonLabel(scans []figureScan) string {
	l := scans[0].scan.Request.Label
	for _, s := range scans[1:] {
		if s.scan.Request.Label != l {
			return ""
		}
	}
	return l
}

func kindText(r client.ScanRequest) string {
	switch r.Kind {
	case client.Coupled:
		return fmt.Sprintf("θ–2θ scan %g–%g°", math.Min(r.From, r.To), math.Max(r.From, r.To))
	case client.Axis:
		return fmt.Sprintf("%s scan %g–%g°", r.Axis, math.Min(r.From, r.To), math.Max(r.From, r.To))
	case client.Timed:
		return fmt.Sprintf("%d counts at one position", r.Points)
	}
	return fmt.Sprintf("%d positions", len(r.Positions))
}

// seriesText names an overlay: a tube-voltage or -current series when the scans differ only in that.
func seriesText(scans []figureScan) string {
	var kvs, mas []float64
	for _, s := range scans {
		src := s.scan.Request.Source
		if src == nil {
			return fmt.Sprintf("%d scans", len(scans))
		}
		kvs, mas = append(kvs, src.KV), append(mas, src.MA)
	}
	span := func(v []float64) (float64, float64) { return slices.Min(v), slices.Max(v) }
	kLo, kHi := span(kvs)
	mLo, mHi := span(mas)
	switch {
	case kLo != kHi && mLo == mHi:
		return fmt.Sprintf("tube-voltage series %g–%g kV at %g mA", kLo, kHi, mLo)
	case mLo != mHi && kLo == kHi:
		return fmt.Sprintf("tube-current series %g–%g mA at %g kV", mLo, mHi, kLo)
	}
	return fmt.Sprintf("%d scans", len(scans))
}

// legendText names one scan among the others: its ID and tube setting, and its label when labels differ.
func legendText(s client.Scan, all []figureScan) string {
	t := s.ID
	if src := s.Request.Source; src != nil {
		t += fmt.Sprintf("  %g kV %g mA", src.KV, src.MA)
	}
	if commonLabel(all) == "" && s.Request.Label != "" {
		t += "  " + s.Request.Label
	}
	return t
}
