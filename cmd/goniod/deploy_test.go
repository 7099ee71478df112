package main

import (
	"bufio"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"goniod/daemon/config"
	"goniod/daemon/server/servertest"
)

// TestDeployPrometheusFiles checks the scrape configuration and alerting rules with promtool, and runs the
// rules' unit tests.
func TestDeployPrometheusFiles(t *testing.T) {
	promtool := servertest.NeedProgram(t, "promtool", "prometheus")
	for _, args := range [][]string{
		{"check", "config", "prometheus.yml"},
		{"check", "rules", "goniod-alerts.yml"},
		{"test", "rules", "goniod-alerts.test.yml"},
	} {
		cmd := exec.Command(promtool, args...)
		cmd.Dir = "deploy"
		if out, err := cmd.CombinedOutput(); err != nil {
			t.Errorf("promtool %s: %v\n%s", strings.Join(args, " "), err, out)
		}
	}
}

// TestDeployConfig: the example configuration loads and asks for TLS, tokens and the safety settings.
func TestDeployConfig(t *testing.T) {
	cfg, err := config.Load(filepath.Join("deploy", "goniod.yaml"))
	if err != nil {
		t.Fatal(err)
	}
	if cfg.Security.TLSCert == "" || cfg.Security.TLSKey == "" || cfg.Security.Tokens == "" {
		t.Errorf("the example listens on the network without TLS or tokens: %+v", cfg.Security)
	}
	if cfg.Safety.KeepHighVoltageOnShutdown || cfg.Safety.IdleHighVoltageOff <= 0 {
		t.Errorf("the example's safety settings: %+v", cfg.Safety)
	}
}

// unitKeys reads a systemd unit's Key=value lines (a key may repeat).
func unitKeys(t *testing.T, path string) map[string][]string {
	t.Helper()
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	keys := map[string][]string{}
	sc := bufio.NewScanner(f)
	for sc.Scan() {
		line := strings.TrimSpace(sc.Text())
		if k, v, ok := strings.Cut(line, "="); ok && !strings.HasPrefix(line, "#") {
			keys[k] = append(keys[k], v)
		}
	}
	return keys
}

// TestDeploySystemdUnit: the unit runs goniod as its own user with the serial devices' group and a state
// directory, restarts it after a failure, and gives SIGTERM time for the shutdown bound of the example
// configuration. systemd-analyze verify runs when it is installed.
func TestDeploySystemdUnit(t *testing.T) {
	path := filepath.Join("deploy", "goniod.service")
	keys := unitKeys(t, path)
	for k, want := range map[string]string{"User": "goniod", "Group": "goniod", "SupplementaryGroups": "dialout",
		"StateDirectory": "goniod", "Restart": "on-failure", "KillSignal": "SIGTERM", "NoNewPrivileges": "yes"} {
		if got := keys[k]; len(got) != 1 || got[0] != want {
			t.Errorf("%s=%v, want %s", k, got, want)
		}
	}
	if !strings.Contains(strings.Join(keys["ExecStart"], ""), "--config /etc/goniod/goniod.yaml") {
		t.Errorf("ExecStart=%v does not read /etc/goniod/goniod.yaml", keys["ExecStart"])
	}
	stop, err := time.ParseDuration(strings.Join(keys["TimeoutStopSec"], ""))
	cfg, cerr := config.Load(filepath.Join("deploy", "goniod.yaml"))
	if err != nil || cerr != nil || stop < cfg.Safety.ShutdownTimeout+10*time.Second {
		t.Errorf("TimeoutStopSec=%v (%v) leaves too little time for shutdown_timeout %v (%v)", keys["TimeoutStopSec"], err, cfg.Safety.ShutdownTimeout, cerr)
	}
	analyze, err := exec.LookPath("systemd-analyze")
	if err != nil {
		t.Log("systemd-analyze not installed: unit not verified by systemd")
		return
	}
	out, _ := exec.Command(analyze, "verify", "--man=no", path).CombinedOutput()
	for _, line := range strings.Split(strings.TrimSpace(string(out)), "\n") {
		// The binary is not installed where the unit expects it on a build machine.
		if line != "" && !strings.Contains(line, "/usr/local/bin/goniod is not executable") {
			t.Errorf("systemd-analyze verify: %s", line)
		}
	}
}
