package python

import (
	"bufio"
	"context"
	"fmt"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"goniod/client"
	"goniod/daemon/server/servertest"
	goniodv1 "goniod/proto/goniod/v1"
)

const python = "/usr/bin/python3" // Debian's interpreter, which sees python3-grpcio and python3-grpc-tools

// needPython skips when the example's tools are missing, unless CI is set: there they must be installed.
func needPython(t *testing.T) {
	t.Helper()
	var missing []string
	if err := exec.Command(python, "-c", "import grpc, grpc_tools.protoc, google.protobuf").Run(); err != nil {
		missing = append(missing, "python3-grpcio, python3-grpc-tools and python3-protobuf for "+python)
	}
	if _, err := exec.LookPath("protoc"); err != nil {
		missing = append(missing, "protoc (protobuf-compiler)")
	}
	if _, err := os.Stat("/usr/include/google/protobuf/duration.proto"); err != nil {
		missing = append(missing, "the well-known .proto files (libprotobuf-dev)")
	}
	if len(missing) == 0 {
		return
	}
	msg := "the Python example needs " + strings.Join(missing, ", ")
	if os.Getenv("CI") != "" {
		t.Fatal(msg)
	}
	t.Skip(msg + " (skipped because CI is unset)")
}

// TestVoltageSeriesScript runs examples/python/voltage_series.py against a daemon on the simulator: it must
// submit a three-voltage series, wait for it, and write one CSV per scan whose rows are the daemon's stored
// points, in gonio's columns.
func TestVoltageSeriesScript(t *testing.T) {
	needPython(t)
	d := servertest.Start(t)
	out := t.TempDir()
	ctx, cancel := context.WithTimeout(context.Background(), 2*time.Minute)
	defer cancel()
	cmd := exec.CommandContext(ctx, python, "voltage_series.py", "--addr", d.Addr, "--kv", "12,20,30",
		"--from", "20", "--to", "23", "--step", "0.1", "--out", out)
	stdout, err := cmd.CombinedOutput()
	if err != nil {
		t.Fatalf("voltage_series.py: %v\n%s", err, stdout)
	}
	t.Logf("voltage_series.py:\n%s", stdout)
	scans, _, err := d.Client.List(ctx, client.ListOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if len(scans) != 3 {
		t.Fatalf("the daemon has %d scans, want the series' 3", len(scans))
	}
	for i, s := range scans {
		wantKV := []float64{30, 20, 12}[i] // newest first
		if s.State != client.Done || s.SeriesID == "" || s.Request.Source == nil || s.Request.Source.KV != wantKV {
			t.Errorf("%s: state %s, series %q, source %+v; want a done scan of the series at %g kV", s.ID, s.State,
				s.SeriesID, s.Request.Source, wantKV)
		}
		comparePoints(t, d, s, filepath.Join(out, s.ID+".csv"))
	}
}

// comparePoints reads a CSV the script wrote with gonio's own column reader and compares it with the stored
// points.
func comparePoints(t *testing.T, d *servertest.Daemon, s client.Scan, path string) {
	t.Helper()
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	sc := bufio.NewScanner(f)
	if !sc.Scan() {
		t.Fatalf("%s is empty", path)
	}
	table, err := goniodv1.ParsePointTable(sc.Text())
	if err != nil {
		t.Fatalf("%s header: %v", path, err)
	}
	if want := client.PointTable(s).Header(); sc.Text()+"\n" != want {
		t.Errorf("%s header\n %q, want gonio's\n %q", path, sc.Text(), want)
	}
	st, err := d.Client.Points(context.Background(), s.ID, 0, 0)
	if err != nil {
		t.Fatal(err)
	}
	n := 0
	for want := range st.C {
		if !sc.Scan() {
			t.Fatalf("%s ends after %d points; the scan has more", path, n)
		}
		got, err := table.DecodeCSV([]byte(sc.Text()))
		if err != nil {
			t.Fatalf("%s line %d: %v", path, n+2, err)
		}
		if err := samePoint(got, want.Proto()); err != nil {
			t.Errorf("%s point %d: %v", path, n, err)
		}
		n++
	}
	if err := st.Err(); err != nil {
		t.Fatal(err)
	}
	if sc.Scan() {
		t.Errorf("%s has more rows than the scan's %d points", path, n)
	}
	if n != 31 {
		t.Errorf("%s: %d points, want 31 (20° to 23° by 0.1°)", path, n)
	}
}

func samePoint(got, want *goniodv1.Point) error {
	if got.GetIndex() != want.GetIndex() || got.GetCounts() != want.GetCounts() {
		return fmt.Errorf("index %d counts %d, want %d and %d", got.GetIndex(), got.GetCounts(), want.GetIndex(), want.GetCounts())
	}
	if !got.GetTime().AsTime().Equal(want.GetTime().AsTime()) {
		return fmt.Errorf("time %v, want %v", got.GetTime().AsTime(), want.GetTime().AsTime())
	}
	pairs := [][2]float64{{got.GetDwellS(), want.GetDwellS()}, {got.GetRateCps(), want.GetRateCps()},
		{got.GetCorrectedRateCps(), want.GetCorrectedRateCps()}, {got.GetTubeKv(), want.GetTubeKv()},
		{got.GetWavelengthNm(), want.GetWavelengthNm()}, {got.GetEnergyKev(), want.GetEnergyKev()}}
	for i, a := range want.GetAxes() {
		if i >= len(got.GetAxes()) {
			return fmt.Errorf("axis %s missing", a.GetName())
		}
		pairs = append(pairs, [2]float64{got.GetAxes()[i].GetActualDeg(), a.GetActualDeg()},
			[2]float64{got.GetAxes()[i].GetSetDeg(), a.GetSetDeg()})
	}
	for _, p := range pairs {
		if p[0] != p[1] && math.Abs(p[0]-p[1]) > 1e-12*math.Abs(p[1]) {
			return fmt.Errorf("value %v, want %v", p[0], p[1])
		}
	}
	return nil
}
