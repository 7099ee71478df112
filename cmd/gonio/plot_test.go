package main

import (
	"encoding/xml"
	"image"
	"image/color"
	"image/png"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"gonum.org/v1/plot/plotutil"

	"goniod/daemon/server/servertest"
)

// svgTexts returns the text elements of an SVG file, after checking it parses as XML with an <svg> root.
func svgTexts(t *testing.T, path string) []string {
	t.Helper()
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	dec := xml.NewDecoder(f)
	var texts []string
	root, inText := "", false
	for {
		tok, err := dec.Token()
		if err != nil {
			if err.Error() != "EOF" {
				t.Fatalf("%s is not well-formed XML: %v", path, err)
			}
			break
		}
		switch el := tok.(type) {
		case xml.StartElement:
			if root == "" {
				root = el.Name.Local
			}
			inText = el.Name.Local == "text"
		case xml.CharData:
			if inText {
				texts = append(texts, strings.TrimSpace(string(el)))
			}
		case xml.EndElement:
			inText = false
		}
	}
	if root != "svg" {
		t.Fatalf("%s: root element %q, want svg", path, root)
	}
	return texts
}

// TestPlotFiles: a tube-voltage series of the demo scenario drawn as SVG and PNG: valid files, one legend entry
// and colour per scan, axis labels with units, a title from the metadata, identified lines annotated.
func TestPlotFiles(t *testing.T) {
	d := servertest.Start(t, servertest.WithSim("seed", int64(5)))
	code, out, errs := run(t, d.Addr, "scan", "coupled", "--from", "19.5", "--to", "23.5", "--step", "0.05", "--dwell", "1s",
		"--series-kv", "20,25,30", "--ma", "0.8", "--label", "LiF batch 7", "--detach")
	if code != exitOK {
		t.Fatalf("series: exit %d: %s", code, errs)
	}
	ids := strings.Fields(out)
	if len(ids) != 3 {
		t.Fatalf("series printed %q, want 3 scan IDs", out)
	}
	d.WaitEnd(t, ids[2])
	dir := t.TempDir()

	svg := filepath.Join(dir, "series.svg")
	if code, _, errs := run(t, d.Addr, append([]string{"plot", "--x", "energy", "-o", svg}, ids...)...); code != exitOK {
		t.Fatalf("plot svg: exit %d: %s", code, errs)
	}
	texts := svgTexts(t, svg)
	all := strings.Join(texts, "\n")
	legend := 0
	for _, s := range texts {
		if strings.HasPrefix(s, "scan-") {
			legend++
		}
	}
	if legend != 3 {
		t.Errorf("SVG has %d legend entries, want 3 (one per scan):\n%s", legend, all)
	}
	for _, want := range []string{"photon energy E (keV", "count rate (counts/s)", "LiF batch 7: tube-voltage series 20–30 kV",
		"20 kV 0.8 mA", "30 kV 0.8 mA", "Cu Kα1", "Cu Kβ1"} {
		if !strings.Contains(all, want) {
			t.Errorf("SVG lacks %q; its texts:\n%s", want, all)
		}
	}

	pngPath := filepath.Join(dir, "one.png")
	if code, _, errs := run(t, d.Addr, "plot", ids[2], "--x", "twotheta", "--log", "--y", "counts", "-o", pngPath); code != exitOK {
		t.Fatalf("plot png: exit %d: %s", code, errs)
	}
	f, err := os.Open(pngPath)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	img, err := png.Decode(f)
	if err != nil {
		t.Fatalf("not a PNG: %v", err)
	}
	// 18 cm × 11 cm at gonum's 96 dpi.
	if b := img.Bounds(); b.Dx() < 670 || b.Dx() > 690 || b.Dy() < 410 || b.Dy() > 420 {
		t.Errorf("PNG is %v, want about 680×416 pixels", b)
	}
	if !hasColour(img, plotutil.Color(0)) {
		t.Error("PNG has no pixel in the series colour")
	}
	if hasColour(img, plotutil.Color(1)) {
		t.Error("PNG of one scan has a pixel in the second series colour")
	}
}

// hasColour reports whether some pixel of img has exactly the colour c.
func hasColour(img image.Image, c color.Color) bool {
	r0, g0, b0, _ := c.RGBA()
	b := img.Bounds()
	for y := b.Min.Y; y < b.Max.Y; y++ {
		for x := b.Min.X; x < b.Max.X; x++ {
			if r, g, bl, _ := img.At(x, y).RGBA(); r == r0 && g == g0 && bl == b0 {
				return true
			}
		}
	}
	return false
}

// TestPlotRefusals: bad options are refused with the usage exit code before anything is drawn.
func TestPlotRefusals(t *testing.T) {
	d := servertest.Start(t)
	code, out, _ := run(t, d.Addr, "scan", "timed", "--points", "3", "--dwell", "1s", "--detach")
	if code != exitOK {
		t.Fatal("timed scan refused")
	}
	id := strings.TrimSpace(out)
	d.WaitEnd(t, id)
	dir := t.TempDir()
	for _, c := range []struct {
		args []string
		want string
	}{
		{[]string{"plot", id, "-o", filepath.Join(dir, "x.gif")}, ".svg, .png or .pdf"},
		{[]string{"plot", id, "--y", "dose", "-o", filepath.Join(dir, "x.svg")}, "--y"},
		{[]string{"plot", id, "--x", "chi", "-o", filepath.Join(dir, "x.svg")}, "chi"},
		{[]string{"plot", id, "--annotate", "all", "-o", filepath.Join(dir, "x.svg")}, "--annotate"},
		{[]string{"plot", id, "--width", "1", "-o", filepath.Join(dir, "x.svg")}, "cm"},
	} {
		code, _, errs := run(t, d.Addr, c.args...)
		if code != exitUsage || !strings.Contains(errs, c.want) {
			t.Errorf("gonio %s: exit %d, stderr %q; want %d naming %q", strings.Join(c.args, " "), code, errs, exitUsage, c.want)
		}
	}
	if code, _, errs := run(t, d.Addr, "plot", "scan-999999", "-o", filepath.Join(dir, "x.svg")); code != exitNotFound {
		t.Errorf("plot of a missing scan: exit %d (%s), want %d", code, errs, exitNotFound)
	}
	entries, _ := os.ReadDir(dir)
	if len(entries) != 0 {
		t.Errorf("refused plots left files behind: %v", entries)
	}
}
