package xray

import (
	"encoding/json"
	"errors"
	"os"
	"os/exec"
	"testing"
)

// debianPython is Debian's interpreter, which sees the python3-xraylib package; a python3 earlier on PATH may
// be another interpreter that cannot (platform notes).
const debianPython = "/usr/bin/python3"

// xraylib runs a Python script that imports xraylib and prints one JSON value, and decodes it into v.
// Without python3-xraylib the test is skipped locally and fails under CI (env CI set).
func xraylib(t *testing.T, script string, v any) {
	t.Helper()
	out, err := exec.Command(debianPython, "-c", "import json, math, xraylib as x\n"+script).Output()
	if err != nil {
		var ee *exec.ExitError
		msg := err.Error()
		if errors.As(err, &ee) {
			msg += ": " + string(ee.Stderr)
		}
		if os.Getenv("CI") == "" {
			t.Skipf("python3-xraylib not usable (%s); install Debian's python3-xraylib to run this check", msg)
		}
		t.Fatalf("python3-xraylib is required under CI: %s", msg)
	}
	if err := json.Unmarshal(out, v); err != nil {
		t.Fatalf("xraylib script output %q: %v", out, err)
	}
}
