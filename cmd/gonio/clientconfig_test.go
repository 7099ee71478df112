package main

import (
	"os"
	"path/filepath"
	"strings"
	"testing"

	"goniod/client"
)

const labConfig = `# two benches of the demo lab
addr: 10.0.0.9:7461
token_file: default.token
timeout: 5s
instrument: bench-a
instruments:
  bench-a: {addr: 10.0.0.1:7461, token_file: ~/bench-a.token}
  bench-b:
    addr: 10.0.0.2:7461
    tls_ca: /etc/lab/ca.pem
`

// TestResolvePrecedence: flags win over the named instrument's entry, which wins over the environment, which
// wins over the file's defaults.
func TestResolvePrecedence(t *testing.T) {
	dir := t.TempDir()
	path := filepath.Join(dir, "config.yaml")
	if err := os.WriteFile(path, []byte(labConfig), 0o644); err != nil {
		t.Fatal(err)
	}
	home, _ := os.UserHomeDir()
	for _, c := range []struct {
		name       string
		app        app
		env        map[string]string
		want       endpoint
		instrument string
	}{
		{"file's default instrument", app{}, nil,
			endpoint{Addr: "10.0.0.1:7461", TokenFile: filepath.Join(home, "bench-a.token")}, "bench-a"},
		{"--instrument", app{instrument: "bench-b"}, nil,
			endpoint{Addr: "10.0.0.2:7461", TLSCA: "/etc/lab/ca.pem", TokenFile: filepath.Join(dir, "default.token")}, "bench-b"},
		{"$GONIO_INSTRUMENT", app{}, map[string]string{"GONIO_INSTRUMENT": "bench-b"},
			endpoint{Addr: "10.0.0.2:7461", TLSCA: "/etc/lab/ca.pem", TokenFile: filepath.Join(dir, "default.token")}, "bench-b"},
		{"--addr over the instrument", app{addr: "127.0.0.1:9"}, nil,
			endpoint{Addr: "127.0.0.1:9", TokenFile: filepath.Join(home, "bench-a.token")}, "bench-a"},
		{"instrument over $GONIO_ADDR", app{}, map[string]string{"GONIO_ADDR": "127.0.0.1:8"},
			endpoint{Addr: "10.0.0.1:7461", TokenFile: filepath.Join(home, "bench-a.token")}, "bench-a"},
		{"--token-file and --tls-ca", app{tokenFile: "/tmp/t", tlsCA: "/tmp/ca.pem", instrument: "bench-b"}, nil,
			endpoint{Addr: "10.0.0.2:7461", TLSCA: "/tmp/ca.pem", TokenFile: "/tmp/t"}, "bench-b"},
	} {
		t.Run(c.name, func(t *testing.T) {
			for k, v := range c.env {
				t.Setenv(k, v)
			}
			a := c.app
			a.configPath = path
			got, err := a.resolve("")
			if err != nil {
				t.Fatal(err)
			}
			if got.endpoint != c.want || got.name != c.instrument {
				t.Errorf("resolved %s %+v, want %s %+v", got.name, got.endpoint, c.instrument, c.want)
			}
		})
	}
}

// TestResolveWithoutFile: no configuration file: environment, then the built-in address; a raw token from
// $GONIO_TOKEN is used when no token file applies.
func TestResolveWithoutFile(t *testing.T) {
	t.Setenv("GONIO_TOKEN", "s3cret")
	a := &app{}
	got, err := a.resolve("")
	if err != nil || got.Addr != client.DefaultAddr || got.token != "s3cret" {
		t.Errorf("resolved %+v, %v; want %s with the token", got, err, client.DefaultAddr)
	}
	t.Setenv("GONIO_ADDR", "127.0.0.1:7000")
	a = &app{}
	if got, _ := a.resolve(""); got.Addr != "127.0.0.1:7000" {
		t.Errorf("with $GONIO_ADDR: %s", got.Addr)
	}
	a = &app{instrument: "bench-a"}
	if _, err := a.resolve(""); err == nil || exitCode(err) != exitUsage {
		t.Errorf("--instrument without a configuration: %v", err)
	}
}

// TestConfigMistakes: a bad configuration file is refused with the line and key of each mistake.
func TestConfigMistakes(t *testing.T) {
	for _, c := range []struct{ name, file, want string }{
		{"unknown key", "adress: x:1\n", "c.yaml:1: adress: unknown key (known: addr, instrument, instruments, timeout, tls_ca, tls_cert, tls_key, token_file)"},
		{"no port", "addr: bench-a\n", `c.yaml:1: addr: "bench-a": want host:port`},
		{"instrument without addr", "instruments:\n  bench-a: {token_file: t}\n", "c.yaml:2: instruments.bench-a: needs addr"},
		{"unknown instrument key", "instruments:\n  bench-a: {addr: a:1, tokenfile: t}\n", "c.yaml:2: instruments.bench-a.tokenfile: unknown key"},
		{"default not listed", "instrument: bench-c\ninstruments:\n  bench-a: {addr: a:1}\n", `instrument: "bench-c" is not one of instruments (bench-a)`},
		{"bad name", "instruments:\n  bench a: {addr: a:1}\n", "c.yaml:2: instruments.bench a: instrument names are"},
		{"bad timeout", "timeout: forever\n", `c.yaml:1: timeout: "forever" must be a positive duration`},
	} {
		t.Run(c.name, func(t *testing.T) {
			err := parseClientConfig("c.yaml", []byte(c.file), &clientConfig{instruments: map[string]endpoint{}})
			if err == nil || !strings.Contains(err.Error(), c.want) {
				t.Errorf("error %v, want one containing %q", err, c.want)
			}
		})
	}
}

// TestMissingConfig: a missing default file is no configuration; a named one that is missing is an error.
func TestMissingConfig(t *testing.T) {
	missing := filepath.Join(t.TempDir(), "none.yaml")
	if cfg, err := loadClientConfig(missing, false); err != nil || len(cfg.instruments) != 0 {
		t.Errorf("missing default file: %+v, %v", cfg, err)
	}
	if _, err := loadClientConfig(missing, true); err == nil {
		t.Error("a missing --config file was accepted")
	}
}

// FuzzClientConfig: no input crashes the configuration reader; every instrument it accepts has an address.
func FuzzClientConfig(f *testing.F) {
	f.Add([]byte(labConfig))
	f.Add([]byte("instruments: {a: {addr: 'h:1'}, b: &x {addr: 'h:2'}, c: *x}\n"))
	f.Fuzz(func(t *testing.T, data []byte) {
		cfg := &clientConfig{instruments: map[string]endpoint{}}
		if err := parseClientConfig("fuzz.yaml", data, cfg); err != nil {
			return
		}
		for name, ep := range cfg.instruments {
			if ep.Addr == "" {
				t.Fatalf("accepted instrument %q without an address", name)
			}
		}
	})
}
