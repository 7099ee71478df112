package main

import (
	"bytes"
	"io"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// serialSection is the part of the serial driver's settings the flags set.
type serialSection struct {
	Device  string `yaml:"device"`
	Baud    int    `yaml:"baud"`
	Profile string `yaml:"profile"`
	Parity  string `yaml:"parity"`
}

func TestSerialFlags(t *testing.T) {
	dir := t.TempDir()
	file := filepath.Join(dir, "goniod.yaml")
	if err := os.WriteFile(file, []byte("driver: serial\ndrivers:\n  serial:\n    device: /dev/ttyUSB0\n    baud: 9600\n    parity: even\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	tests := []struct {
		args []string
		want serialSection
	}{
		{[]string{"--serial", "/tmp/tty-goniosim", "--baud", "115200"}, serialSection{Device: "/tmp/tty-goniosim", Baud: 115200}},
		{[]string{"--serial", "COM3", "--profile", "bench.yaml"}, serialSection{Device: "COM3", Profile: "bench.yaml"}},
		{[]string{"--config", file}, serialSection{Device: "/dev/ttyUSB0", Baud: 9600, Parity: "even"}},
		{[]string{"--config", file, "--baud", "19200"}, serialSection{Device: "/dev/ttyUSB0", Baud: 19200, Parity: "even"}},
	}
	for _, tc := range tests {
		f, err := parseFlags(tc.args, io.Discard)
		if err != nil {
			t.Fatal(err)
		}
		cfg, err := f.merge()
		if err != nil {
			t.Fatalf("%v: %v", tc.args, err)
		}
		var got serialSection
		if err := cfg.DriverDecoder("serial")(&got); err != nil {
			t.Fatal(err)
		}
		if cfg.Driver != "serial" || got != tc.want {
			t.Errorf("%v: driver %q, section %+v; want serial, %+v", tc.args, cfg.Driver, got, tc.want)
		}
	}
	for _, args := range [][]string{{"--sim", "--serial", "/dev/ttyUSB0"}, {"--sim", "--baud", "9600"}, {"--profile", "x.yaml"}} {
		f, err := parseFlags(args, io.Discard)
		if err != nil {
			t.Fatal(err)
		}
		if _, err := f.merge(); err == nil {
			t.Errorf("%v accepted", args)
		}
	}
}

// TestSerialDeviceMissing: a wrong device path stops goniod at start with a plain message, not a panic.
func TestSerialDeviceMissing(t *testing.T) {
	dir := t.TempDir()
	var stderr bytes.Buffer
	code := run([]string{"--serial", "/dev/no-such-tty", "--listen", "127.0.0.1:0", "--metrics-listen", "127.0.0.1:0",
		"--data", filepath.Join(dir, "data")}, &stderr)
	if code == 0 || !strings.Contains(stderr.String(), "serial device /dev/no-such-tty does not exist") {
		t.Errorf("exit %d, log:\n%s", code, stderr.String())
	}
}

// TestSerialBadProfile: a profile with a mistake stops goniod at start with the file, line and field named.
func TestSerialBadProfile(t *testing.T) {
	dir := t.TempDir()
	prof := filepath.Join(dir, "bench.yaml")
	text := "name: bench\ninstrument:\n  axes: [{name: theta, min_deg: 0, max_deg: 90, resolution_deg: 0.01}]\n" +
		"  channels: [detector]\noperations:\n  move: {send: \"goto {deg}\", reply: '^(?P<deg>.+)$', units: {deg: mA}}\n"
	if err := os.WriteFile(prof, []byte(text), 0o644); err != nil {
		t.Fatal(err)
	}
	var stderr bytes.Buffer
	code := run([]string{"--serial", "/dev/no-such-tty", "--profile", prof, "--listen", "127.0.0.1:0",
		"--metrics-listen", "127.0.0.1:0", "--data", filepath.Join(dir, "data")}, &stderr)
	want := "profile " + prof + " line 6: operations.move.units.deg: unit \"mA\" is not an angle unit"
	if log := strings.ReplaceAll(stderr.String(), `\"`, `"`); code == 0 || !strings.Contains(log, want) {
		t.Errorf("exit %d, log:\n%s\nwant it to say %q", code, log, want)
	}
}
