package main

import (
	"bytes"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// TestRefusesNetworkListenWithoutTLS: a non-loopback listen address without TLS is refused at start, unless
// --insecure says so explicitly; the refusal goes to the log file when one is given.
func TestRefusesNetworkListenWithoutTLS(t *testing.T) {
	dir := t.TempDir()
	logFile := filepath.Join(dir, "goniod.log")
	var stderr bytes.Buffer
	code := run([]string{"--sim", "--listen", "0.0.0.0:0", "--metrics-listen", "127.0.0.1:0", "--data", filepath.Join(dir, "data"),
		"--log-file", logFile}, &stderr)
	if code == 0 {
		t.Fatal("goniod accepted a network listen address without TLS")
	}
	b, err := os.ReadFile(logFile)
	if err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(string(b), "TLS") || !strings.Contains(string(b), "--insecure") {
		t.Errorf("the refusal does not say what to do:\n%s", b)
	}
	if stderr.Len() != 0 {
		t.Errorf("logged to stderr although a log file was given: %s", stderr.String())
	}
}
