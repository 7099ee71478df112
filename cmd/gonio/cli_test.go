package main

import (
	"bytes"
	"encoding/json"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"goniod/daemon/server/servertest"
)

// run executes gonio in-process against addr and returns exit code, stdout and stderr.
func run(t *testing.T, addr string, args ...string) (int, string, string) {
	t.Helper()
	var out, errb bytes.Buffer
	code := execute(append([]string{"--addr", addr}, args...), strings.NewReader(""), &out, &errb)
	return code, out.String(), errb.String()
}

func TestScanDetachFetchAndWatch(t *testing.T) {
	d := servertest.Start(t)
	code, out, errs := run(t, d.Addr, "scan", "coupled", "--from", "20", "--to", "21", "--step", "0.1", "--dwell", "1s", "--kv", "30", "--ma", "0.8", "--detach")
	if code != exitOK {
		t.Fatalf("scan exit %d: %s", code, errs)
	}
	id := strings.TrimSpace(out)
	if !strings.HasPrefix(id, "scan-") || strings.Contains(id, "\n") {
		t.Fatalf("--detach printed %q, want only the scan ID", out)
	}
	code, out, errs = run(t, d.Addr, "watch", id, "--output", "json")
	if code != exitOK {
		t.Fatalf("watch exit %d: %s", code, errs)
	}
	lines := strings.Split(strings.TrimSpace(out), "\n")
	if len(lines) != 11 {
		t.Fatalf("watch printed %d JSON lines, want 11 points", len(lines))
	}
	for _, l := range lines {
		var p map[string]any
		if err := json.Unmarshal([]byte(l), &p); err != nil {
			t.Fatalf("watch line %q: %v", l, err)
		}
		for _, k := range []string{"theta_deg", "twotheta_deg", "dwell_s", "counts", "rate_cps", "rate_err_cps"} {
			if _, ok := p[k]; !ok {
				t.Errorf("watch JSON lacks %s: %s", k, l)
			}
		}
	}
	code, out, _ = run(t, d.Addr, "fetch", id, "--format", "csv")
	rows := strings.Split(strings.TrimSpace(out), "\n")
	if code != exitOK || len(rows) != 12 || !strings.HasPrefix(rows[0], "index,time,theta_deg,twotheta_deg,") {
		t.Fatalf("fetch csv exit %d, %d rows, header %q", code, len(rows), rows[0])
	}
	code, out, _ = run(t, d.Addr, "list", "--output", "json")
	var list []map[string]any
	if code != exitOK || json.Unmarshal([]byte(out), &list) != nil || len(list) != 1 || list[0]["state"] != "done" {
		t.Fatalf("list --output json exit %d: %s", code, out)
	}
}

func TestRefusalsAndExitCodes(t *testing.T) {
	d := servertest.Start(t)
	code, _, errs := run(t, d.Addr, "scan", "coupled", "--from", "10", "--to", "30", "--step", "-0.1", "--dwell", "1s", "--detach")
	if code != exitUsage || !strings.Contains(errs, "step_deg") {
		t.Errorf("negative step: exit %d, stderr %q; want %d naming step_deg", code, errs, exitUsage)
	}
	code, _, errs = run(t, d.Addr, "show", "scan-999999")
	if code != exitNotFound {
		t.Errorf("show of a missing scan: exit %d (%s), want %d", code, errs, exitNotFound)
	}
	code, _, errs = run(t, d.Addr, "move", "theta", "north")
	if code != exitUsage || !strings.Contains(errs, "north") {
		t.Errorf("move to a non-number: exit %d (%s)", code, errs)
	}
	code, _, errs = run(t, d.Addr, "move", "theta", "500")
	if code != exitUsage || !strings.Contains(errs, "angle_deg") {
		t.Errorf("move beyond the limit: exit %d (%s)", code, errs)
	}
	code, _, _ = run(t, "127.0.0.1:1", "--timeout", "2s", "status")
	if code != exitUnavailable {
		t.Errorf("status of no daemon: exit %d, want %d", code, exitUnavailable)
	}
}

// Every command teaches by example.
func TestEveryCommandHasAnExample(t *testing.T) {
	a := &app{}
	root := a.rootCommand()
	for _, c := range root.Commands() {
		if c.Example == "" && c.Name() != "help" && c.Name() != "completion" {
			t.Errorf("gonio %s has no example in its help", c.Name())
		}
		for _, sub := range c.Commands() {
			if sub.Example == "" {
				t.Errorf("gonio %s %s has no example in its help", c.Name(), sub.Name())
			}
		}
	}
}

// TestCompletion: shell completion offers the daemon's scan IDs and the fixed values of flags.
func TestCompletion(t *testing.T) {
	d := servertest.Start(t)
	code, out, errs := run(t, d.Addr, "scan", "timed", "--points", "2", "--dwell", "1s", "--label", "LiF batch 7", "--detach")
	if code != exitOK {
		t.Fatalf("scan: exit %d: %s", code, errs)
	}
	id := strings.TrimSpace(out)
	d.WaitEnd(t, id)
	if _, out, _ := run(t, d.Addr, "__complete", "show", "scan-"); !strings.Contains(out, id+"\tdone LiF batch 7") {
		t.Errorf("completion of show: %q, want %s with its state and label", out, id)
	}
	if _, out, _ := execOut(t, "__complete", "plot", "x", "--x", ""); !strings.Contains(out, "energy") {
		t.Errorf("completion of plot --x: %q", out)
	}
	if code, out, _ := run(t, d.Addr, "completion", "bash"); code != exitOK || !strings.Contains(out, "__start_gonio") {
		t.Errorf("completion bash: exit %d, %d bytes", code, len(out))
	}
}

// TestStatusAllUnreachable: instruments that do not answer are marked; with none answering the exit code says
// unavailable; --all does not mix with --addr.
func TestStatusAllUnreachable(t *testing.T) {
	cfg := filepath.Join(t.TempDir(), "config.yaml")
	if err := os.WriteFile(cfg, []byte("instruments:\n  bench-b: {addr: 127.0.0.1:1}\n  bench-c: {addr: 127.0.0.1:2}\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	code, out, _ := execOut(t, "--config", cfg, "--timeout", "2s", "status", "--all")
	if code != exitUnavailable || strings.Count(out, "unreachable") != 2 {
		t.Errorf("exit %d, output %q; want %d and both instruments marked unreachable", code, out, exitUnavailable)
	}
	if code, _, errs := execOut(t, "--config", cfg, "--addr", "127.0.0.1:1", "status", "--all"); code != exitUsage {
		t.Errorf("--all with --addr: exit %d (%s), want %d", code, errs, exitUsage)
	}
}
