package main

import (
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"goniod/daemon/server/servertest"
)

// TestGoldenOutputs runs the commands against a daemon on the simulator with a fixed seed and compares their
// table, JSON and CSV output with testdata/*.golden (times, ports and hashes masked). Run with -update after
// a deliberate change of layout, and read the diff.
func TestGoldenOutputs(t *testing.T) {
	d := servertest.Start(t, servertest.WithSim("seed", int64(3)))
	cfg := filepath.Join(t.TempDir(), "config.yaml")
	err := os.WriteFile(cfg, []byte(fmt.Sprintf("instruments:\n  bench-a: {addr: %s}\n  bench-b: {addr: 127.0.0.1:1}\n", d.Addr)), 0o644)
	if err != nil {
		t.Fatal(err)
	}
	must := func(args ...string) string {
		t.Helper()
		code, out, errs := run(t, d.Addr, args...)
		if code != exitOK {
			t.Fatalf("gonio %s: exit %d: %s", strings.Join(args, " "), code, errs)
		}
		return out
	}
	id := strings.TrimSpace(must("scan", "coupled", "--from", "22", "--to", "23", "--step", "0.1", "--dwell", "1s",
		"--kv", "30", "--ma", "0.8", "--label", "LiF batch 7", "--detach"))
	d.WaitEnd(t, id)
	ids := strings.Fields(must("scan", "coupled", "--from", "20", "--to", "21", "--step", "0.5", "--series-kv", "20,30",
		"--ma", "0.8", "--detach"))
	d.WaitEnd(t, ids[len(ids)-1])

	cases := []struct {
		name string
		args []string
	}{
		{"show.table", []string{"show", id}},
		{"show.json", []string{"show", id, "--output", "json"}},
		{"show.csv", []string{"show", id, "--output", "csv"}},
		{"list.table", []string{"list"}},
		{"list.json", []string{"list", "--output", "json"}},
		{"series.table", []string{"series", "series-000001"}},
		{"fetch.csv", []string{"fetch", id}},
		{"watch.json", []string{"watch", id, "--output", "json"}},
		{"watch.table", []string{"watch", id}},
		{"config.table", []string{"config"}},
		{"config.json", []string{"config", "--output", "json"}},
		{"convert.table", []string{"convert", "22.5", "20.2", "--order", "1"}},
		{"convert.csv", []string{"convert", "--wavelength", "0.154", "--output", "csv"}},
		{"move.table", []string{"move", "twotheta", "45"}},
		{"status.table", []string{"status"}},
		{"status.json", []string{"status", "--output", "json"}},
		{"status-all.table", []string{"--config", cfg, "status", "--all"}},
		{"status-all.json", []string{"--config", cfg, "status", "--all", "--output", "json"}},
		{"run-check.table", []string{"run", filepath.Join("testdata", "plan-lif-batch7.yaml"), "--check"}},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			args := c.args
			if strings.HasPrefix(args[0], "--config") {
				code, out, errs := execOut(t, args...)
				if code != exitOK {
					t.Fatalf("exit %d: %s", code, errs)
				}
				golden(t, c.name, out)
				return
			}
			golden(t, c.name, must(args...))
		})
	}
}

// execOut runs gonio without --addr.
func execOut(t *testing.T, args ...string) (int, string, string) {
	t.Helper()
	var out, errb strings.Builder
	code := execute(args, strings.NewReader(""), &out, &errb)
	return code, out.String(), errb.String()
}

// TestGoldenPlanErrors: every mistake of a plan is reported at once, each with its line, before anything is
// submitted.
func TestGoldenPlanErrors(t *testing.T) {
	code, out, errs := execOut(t, "--addr", "127.0.0.1:1", "run", filepath.Join("testdata", "plan-mistakes.yaml"))
	if code != exitUsage || out != "" {
		t.Fatalf("exit %d, stdout %q; want %d and nothing printed", code, out, exitUsage)
	}
	golden(t, "plan-mistakes.stderr", errs)
}
