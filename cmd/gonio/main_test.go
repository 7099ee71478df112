package main

import (
	"bytes"
	"flag"
	"fmt"
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"testing"
	"time"
)

var update = flag.Bool("update", false, "rewrite the golden files in testdata/ from the present output")

// TestMain keeps the tests away from the user's gonio configuration and environment, and prints times in UTC so
// that tables are the same everywhere.
func TestMain(m *testing.M) {
	flag.Parse()
	dir, err := os.MkdirTemp("", "gonio-test-home")
	if err != nil {
		panic(err)
	}
	os.Setenv("XDG_CONFIG_HOME", dir)
	for _, k := range []string{"GONIO_ADDR", "GONIO_CONFIG", "GONIO_INSTRUMENT", "GONIO_TOKEN", "GONIO_TOKEN_FILE", "GONIO_TLS_CA"} {
		os.Unsetenv(k)
	}
	time.Local = time.UTC
	code := m.Run()
	os.RemoveAll(dir)
	os.Exit(code)
}

// masks replace what changes from run to run (times, ports, data directories, configuration hashes).
var masks = []struct {
	re   *regexp.Regexp
	with string
}{
	{regexp.MustCompile(`\d{4}-\d\d-\d\dT\d\d:\d\d:\d\d(\.\d+)?Z`), "TIME"},
	{regexp.MustCompile(`\d{4}-\d\d-\d\d \d\d:\d\d(:\d\d)?`), "TIME"},
	{regexp.MustCompile(`127\.0\.0\.1:\d+`), "ADDR"},
	{regexp.MustCompile(`(config[ _]hash"?[:,]"?|config )[0-9a-f]{6,}`), "${1}HASH"},
}

func mask(s string) string {
	for _, m := range masks {
		s = m.re.ReplaceAllString(s, m.with)
	}
	return s
}

// golden compares got with testdata/NAME.golden (masked); -update rewrites the file.
func golden(t *testing.T, name, got string) {
	t.Helper()
	got = mask(got)
	path := filepath.Join("testdata", name+".golden")
	if *update {
		if err := os.MkdirAll("testdata", 0o755); err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(path, []byte(got), 0o644); err != nil {
			t.Fatal(err)
		}
		return
	}
	want, err := os.ReadFile(path)
	if err != nil {
		t.Fatalf("%v (run the test with -update to write it)", err)
	}
	if !bytes.Equal(want, []byte(got)) {
		t.Errorf("%s differs from %s (run with -update after checking the change):\n%s", name, path, diffLines(string(want), got))
	}
}

// diffLines shows the first lines that differ.
func diffLines(want, got string) string {
	w, g := strings.Split(want, "\n"), strings.Split(got, "\n")
	var b strings.Builder
	shown := 0
	for i := 0; i < max(len(w), len(g)) && shown < 8; i++ {
		var wl, gl string
		if i < len(w) {
			wl = w[i]
		}
		if i < len(g) {
			gl = g[i]
		}
		if wl != gl {
			fmt.Fprintf(&b, "line %d:\n  want %s\n  got  %s\n", i+1, wl, gl)
			shown++
		}
	}
	return b.String()
}
