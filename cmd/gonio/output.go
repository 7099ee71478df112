package main

import (
	"encoding/csv"
	"encoding/json"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"strconv"
	"time"

	"goniod/client"
)

// Output formats of --output.
const (
	outTable = "table"
	outJSON  = "json"
	outCSV   = "csv"
)

func (a *app) checkOutput() error {
	switch a.output {
	case outTable, outJSON, outCSV:
		return nil
	}
	return usageError("--output %q: use table, json or csv", a.output)
}

// writeJSON writes v as one JSON line.
func writeJSON(w io.Writer, v any) error {
	b, err := json.Marshal(v)
	if err != nil {
		return err
	}
	_, err = fmt.Fprintf(w, "%s\n", b)
	return err
}

// writeCSV writes a header row (unless nil) and the rows.
func writeCSV(w io.Writer, header []string, rows ...[]string) error {
	cw := csv.NewWriter(w)
	if header != nil {
		if err := cw.Write(header); err != nil {
			return err
		}
	}
	if err := cw.WriteAll(rows); err != nil {
		return err
	}
	return cw.Error()
}

// num formats a number for CSV: shortest exact form.
func num(v float64) string { return strconv.FormatFloat(v, 'g', -1, 64) }

// timeText is a timestamp for CSV (RFC 3339 with the fraction of a second, UTC), empty when unset.
func timeText(t time.Time) string {
	if t.IsZero() {
		return ""
	}
	return t.UTC().Format(time.RFC3339Nano)
}

// localTime is a timestamp for tables, in the local zone.
func localTime(t time.Time) string {
	if t.IsZero() {
		return ""
	}
	return t.Local().Format("2006-01-02 15:04:05")
}

// scanColumns are the CSV columns of a scan record (list, show, series, pause/resume/cancel/release).
var scanColumns = []string{"id", "series_id", "state", "reason", "kind", "points_done", "points_total", "range",
	"dwell_s", "tube_kv", "tube_ma", "label", "operator", "created", "started", "ended"}

func scanRow(s client.Scan) []string {
	kv, ma := "", ""
	if src := s.Request.Source; src != nil {
		kv, ma = num(src.KV), num(src.MA)
	}
	return []string{s.ID, s.SeriesID, string(s.State), s.Reason, string(s.Request.Kind), strconv.Itoa(s.PointsDone),
		strconv.Itoa(s.PointsTotal), describeRange(s.Request), num(s.Request.Dwell.Seconds()), kv, ma, s.Request.Label,
		s.Request.Operator, timeText(s.Created), timeText(s.Started), timeText(s.Ended)}
}

func writeScansCSV(w io.Writer, scans []client.Scan) error {
	rows := make([][]string, len(scans))
	for i, s := range scans {
		rows[i] = scanRow(s)
	}
	return writeCSV(w, scanColumns, rows...)
}

// stateColumns are the CSV columns of an instrument state for the given axes.
func stateColumns(axes []string) []string {
	cols := []string{"instrument", "driver"}
	for _, ax := range axes {
		cols = append(cols, ax+"_deg")
	}
	return append(cols, "tube_kv", "tube_ma", "high_voltage", "interlock_closed", "link", "link_reason", "rate_cps",
		"corrected_rate_cps", "scan_id", "scan_state", "queue_length", "daemon_version")
}

func stateAxes(s client.InstrumentState) []string {
	out := make([]string, len(s.Axes))
	for i, ax := range s.Axes {
		out[i] = ax.Name
	}
	return out
}

func stateRow(s client.InstrumentState, axes []string) []string {
	row := []string{s.Instrument, s.Driver}
	for _, name := range axes {
		v := ""
		for _, ax := range s.Axes {
			if ax.Name == name {
				v = num(ax.Position)
			}
		}
		row = append(row, v)
	}
	return append(row, num(s.KV), num(s.MA), strconv.FormatBool(s.HighVoltage), strconv.FormatBool(s.InterlockClosed),
		s.Link, s.LinkReason, num(s.Rate), num(s.CorrectedRate), s.ScanID, string(s.ScanState),
		strconv.Itoa(s.QueueLength), s.DaemonVersion)
}

// printState prints an instrument state (move, source) in the chosen format; table is one summary line.
func (a *app) printState(s client.InstrumentState, summary string) error {
	switch a.output {
	case outJSON:
		return writeJSON(a.stdout, stateViewOf(s))
	case outCSV:
		axes := stateAxes(s)
		return writeCSV(a.stdout, stateColumns(axes), stateRow(s, axes))
	}
	_, err := fmt.Fprintln(a.stdout, summary)
	return err
}

// printScan prints one scan record (pause, resume, cancel, release); table is one summary line.
func (a *app) printScan(s client.Scan, summary string) error {
	switch a.output {
	case outJSON:
		return writeJSON(a.stdout, viewOf(s))
	case outCSV:
		return writeScansCSV(a.stdout, []client.Scan{s})
	}
	_, err := fmt.Fprintln(a.stdout, summary)
	return err
}

// writeFileAtomic writes a file through a temporary file beside it and a rename, so that a failed write never
// leaves a partial file behind.
func writeFileAtomic(path string, write func(io.Writer) error) error {
	tmp, err := os.CreateTemp(filepath.Dir(path), "."+filepath.Base(path)+".part*")
	if err != nil {
		return err
	}
	defer os.Remove(tmp.Name())
	if err := write(tmp); err != nil {
		tmp.Close()
		return err
	}
	if err := tmp.Chmod(0o644); err != nil {
		tmp.Close()
		return err
	}
	if err := tmp.Close(); err != nil {
		return err
	}
	return os.Rename(tmp.Name(), path)
}
