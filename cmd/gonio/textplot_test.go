package main

import (
	"bytes"
	"fmt"
	"math"
	"strings"
	"testing"
	"unicode/utf8"

	"goniod/client"
)

// TestTextPlot: a peak drawn in block characters, half the range filled (as during a scan), compared with
// testdata/textplot.golden.
func TestTextPlot(t *testing.T) {
	var xs, ys []float64
	for i := 0; i <= 100; i++ {
		x := 20 + 0.025*float64(i)
		xs = append(xs, x)
		ys = append(ys, 40+1600*math.Exp(-math.Pow((x-21.2)/0.08, 2)/2))
	}
	lines := textPlot(xs, ys, 20, 25, 70, 10, "theta (°)", "counts")
	for i, l := range lines {
		if n := utf8.RuneCountInString(l); n > 70 {
			t.Errorf("line %d is %d characters wide, more than 70: %q", i, n, l)
		}
	}
	golden(t, "textplot", strings.Join(lines, "\n")+"\n")
}

// TestTextPlotEdges: no points, one point, a flat zero line and points outside the range draw without fault.
func TestTextPlotEdges(t *testing.T) {
	for _, c := range []struct {
		name   string
		xs, ys []float64
	}{
		{"empty", nil, nil},
		{"one", []float64{1}, []float64{5}},
		{"zeros", []float64{0, 1, 2}, []float64{0, 0, 0}},
		{"outside", []float64{-5, 50}, []float64{3, 4}},
		{"NaN", []float64{1}, []float64{math.NaN()}},
	} {
		lines := textPlot(c.xs, c.ys, 0, 2, 40, 4, "x", "y")
		if len(lines) != 4+3 {
			t.Errorf("%s: %d lines, want 7", c.name, len(lines))
		}
	}
}

// TestLivePlotRedraws: the live view moves the cursor back over its previous frame before drawing the next.
func TestLivePlotRedraws(t *testing.T) {
	var buf bytes.Buffer
	s := client.Scan{Request: client.ScanRequest{Kind: client.Coupled, From: 20, To: 21, Step: 0.1}, PointsTotal: 11}
	l := newLivePlot(&buf, s)
	l.cols, l.rows = 60, 16
	l.add(client.Point{Index: 0, Counts: 10, Axes: []client.AxisReading{{Name: "theta", Actual: 20}}})
	l.status = "first"
	l.draw(true)
	frame := buf.Len()
	l.add(client.Point{Index: 1, Counts: 30, Axes: []client.AxisReading{{Name: "theta", Actual: 20.1}}})
	l.status = "second"
	l.draw(true)
	out := buf.String()
	up := fmt.Sprintf("\033[%dA", strings.Count(out[:frame], "\n"))
	if !strings.Contains(out[frame:], up) || !strings.Contains(out, "second") {
		t.Errorf("second frame does not start with %q:\n%q", up, out[frame:])
	}
}
