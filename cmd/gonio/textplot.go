package main

import (
	"fmt"
	"io"
	"math"
	"strings"
	"time"

	"goniod/client"
)

// blocks are eighths of a character cell, for columns with eight steps of height per row.
var blocks = []rune{' ', '▁', '▂', '▃', '▄', '▅', '▆', '▇', '█'}

// textPlot draws y against x as columns of block characters in a width×height cell area, with the y scale on
// the left and the x range below. The x range is [xmin, xmax] (the scan's whole range, so the plot fills in as
// points arrive); y runs from 0 to the largest value. Each column shows the largest y that falls in it.
func textPlot(xs, ys []float64, xmin, xmax float64, width, height int, xLabel, yLabel string) []string {
	const margin = 9
	cols := max(width-margin-1, 10)
	height = max(height, 3)
	if xmax == xmin {
		xmax = xmin + 1
	}
	lo, hi := math.Min(xmin, xmax), math.Max(xmin, xmax)
	col := make([]float64, cols)
	filled := make([]bool, cols)
	ytop := 0.0
	for i, x := range xs {
		if i >= len(ys) || x < lo || x > hi || math.IsNaN(ys[i]) {
			continue
		}
		c := min(int((x-lo)/(hi-lo)*float64(cols)), cols-1)
		if !filled[c] || ys[i] > col[c] {
			col[c], filled[c] = ys[i], true
		}
		ytop = math.Max(ytop, ys[i])
	}
	if ytop <= 0 {
		ytop = 1
	}
	lines := make([]string, 0, height+3)
	lines = append(lines, fmt.Sprintf("%*s", margin-1, yLabel))
	for row := height - 1; row >= 0; row-- {
		var b strings.Builder
		switch row {
		case height - 1:
			fmt.Fprintf(&b, "%*s ┤", margin-2, shortNumber(ytop))
		case 0:
			fmt.Fprintf(&b, "%*s ┤", margin-2, "0")
		default:
			fmt.Fprintf(&b, "%*s │", margin-2, "")
		}
		for c := range cols {
			eighths := 0
			if filled[c] {
				eighths = int(math.Round(col[c] / ytop * float64(height*8)))
			}
			n := min(max(eighths-row*8, 0), 8)
			if filled[c] && row == 0 && n == 0 {
				n = 1 // a measured zero still shows
			}
			b.WriteRune(blocks[n])
		}
		lines = append(lines, strings.TrimRight(b.String(), " "))
	}
	lines = append(lines, strings.Repeat(" ", margin-1)+"└"+strings.Repeat("─", cols))
	left, right := shortNumber(lo), shortNumber(hi)
	gap := max(cols-len(left)-len(right)-len(xLabel), 2)
	lines = append(lines, strings.Repeat(" ", margin)+left+strings.Repeat(" ", gap/2)+xLabel+strings.Repeat(" ", gap-gap/2)+right)
	return lines
}

// shortNumber prints a value in at most about seven characters.
func shortNumber(v float64) string {
	switch a := math.Abs(v); {
	case a >= 1e6:
		return fmt.Sprintf("%.3g", v)
	case a >= 100 || a == math.Trunc(a):
		return fmt.Sprintf("%.0f", v)
	case a >= 1:
		return fmt.Sprintf("%.2f", v)
	}
	return fmt.Sprintf("%.3g", v)
}

// livePlot is gonio watch's view on a terminal: a status line and a text plot of counts against the scanned
// angle, redrawn in place as points arrive (at most ten times a second).
type livePlot struct {
	scr        *screen
	axis       string
	xmin, xmax float64
	xs, ys     []float64
	status     string
	last       time.Time
	cols, rows int
}

func newLivePlot(w io.Writer, s client.Scan) *livePlot {
	l := &livePlot{scr: &screen{w: w, tty: true}, axis: movedAxis(s)}
	switch s.Request.Kind {
	case client.Coupled, client.Axis:
		l.xmin, l.xmax = s.Request.From, s.Request.To
	default:
		l.xmin, l.xmax = 0, float64(max(s.PointsTotal-1, 1))
	}
	l.cols, l.rows = terminalSize(w)
	return l
}

func (l *livePlot) add(p client.Point) {
	x, ok := float64(p.Index), true
	if l.axis != xIndex {
		x, ok = p.Angle(l.axis)
	}
	if ok {
		l.xs, l.ys = append(l.xs, x), append(l.ys, float64(p.Counts))
	}
}

func (l *livePlot) draw(force bool) {
	if !force && time.Since(l.last) < 100*time.Millisecond {
		return
	}
	l.last = time.Now()
	label := l.axis + " (°)"
	if l.axis == xIndex {
		label = "point"
	}
	lines := textPlot(l.xs, l.ys, l.xmin, l.xmax, min(l.cols, 160), min(max(l.rows-6, 6), 24), label, "counts")
	l.scr.redraw(l.status + "\n" + strings.Join(lines, "\n") + "\n")
}
