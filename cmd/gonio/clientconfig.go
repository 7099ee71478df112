package main

import (
	"errors"
	"fmt"
	"io/fs"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"time"

	"go.yaml.in/yaml/v3"

	"goniod/client"
)

// endpoint is how to reach one daemon: address, TLS files and token file. Empty fields take the next source.
type endpoint struct {
	Addr                   string
	TLSCA, TLSCert, TLSKey string
	TokenFile              string
}

// clientConfig is gonio's configuration file (~/.config/gonio/config.yaml): defaults for every daemon, named
// instruments (one daemon each), and the instrument used when none is named.
type clientConfig struct {
	path        string
	defaults    endpoint
	timeout     time.Duration
	instrument  string
	instruments map[string]endpoint
}

// names returns the instrument names in order.
func (c *clientConfig) names() []string {
	out := make([]string, 0, len(c.instruments))
	for n := range c.instruments {
		out = append(out, n)
	}
	slices.Sort(out)
	return out
}

// defaultConfigPath is $XDG_CONFIG_HOME/gonio/config.yaml (~/.config/gonio/config.yaml on Linux).
func defaultConfigPath() string {
	dir, err := os.UserConfigDir()
	if err != nil {
		return ""
	}
	return filepath.Join(dir, "gonio", "config.yaml")
}

// loadClientConfig reads the configuration file; a missing file is an empty configuration unless it was named
// explicitly (required).
func loadClientConfig(path string, required bool) (*clientConfig, error) {
	cfg := &clientConfig{path: path, instruments: map[string]endpoint{}}
	if path == "" {
		return cfg, nil
	}
	data, err := os.ReadFile(path)
	if errors.Is(err, fs.ErrNotExist) && !required {
		return cfg, nil
	}
	if err != nil {
		return nil, fmt.Errorf("configuration: %w", err)
	}
	return cfg, parseClientConfig(path, data, cfg)
}

func parseClientConfig(path string, data []byte, cfg *clientConfig) error {
	r := &yamlReader{file: path}
	root := r.parse(data)
	if root == nil {
		return r.err()
	}
	dir := filepath.Dir(path)
	fields := endpointFields(r, &cfg.defaults, dir)
	fields["timeout"] = func(v *yaml.Node, p string) { cfg.timeout = r.duration(v, p) }
	fields["instrument"] = func(v *yaml.Node, p string) { cfg.instrument = r.str(v, p) }
	fields["instruments"] = func(v *yaml.Node, p string) {
		v = deref(v)
		if v == nil || v.Kind != yaml.MappingNode {
			r.errorf(v, p, "want a mapping of instrument names to {addr, token_file, tls_ca, …}")
			return
		}
		for i := 0; i+1 < len(v.Content); i += 2 {
			name := v.Content[i].Value
			if !validName(name) {
				r.errorf(v.Content[i], join(p, name), "instrument names are letters, digits, '-', '_' and '.'")
				continue
			}
			if _, dup := cfg.instruments[name]; dup {
				r.errorf(v.Content[i], join(p, name), "given twice")
			}
			var ep endpoint
			r.mapping(v.Content[i+1], join(p, name), endpointFields(r, &ep, dir))
			if ep.Addr == "" {
				r.errorf(v.Content[i], join(p, name), "needs addr (host:port)")
			}
			cfg.instruments[name] = ep
		}
	}
	r.mapping(root, "", fields)
	if cfg.instrument != "" {
		if _, ok := cfg.instruments[cfg.instrument]; !ok {
			r.errorf(root, "instrument", "%q is not one of instruments (%s)", cfg.instrument, strings.Join(cfg.names(), ", "))
		}
	}
	return r.err()
}

// endpointFields reads addr, tls_ca, tls_cert, tls_key and token_file; relative paths are relative to the
// configuration file's directory and ~/ is the home directory.
func endpointFields(r *yamlReader, ep *endpoint, dir string) map[string]func(*yaml.Node, string) {
	file := func(dst *string) func(*yaml.Node, string) {
		return func(v *yaml.Node, p string) { *dst = resolvePath(r.str(v, p), dir) }
	}
	return map[string]func(*yaml.Node, string){
		"addr": func(v *yaml.Node, p string) {
			ep.Addr = r.str(v, p)
			if ep.Addr != "" && !strings.Contains(ep.Addr, ":") {
				r.errorf(v, p, "%q: want host:port, e.g. 127.0.0.1:7461", ep.Addr)
			}
		},
		"tls_ca": file(&ep.TLSCA), "tls_cert": file(&ep.TLSCert), "tls_key": file(&ep.TLSKey),
		"token_file": file(&ep.TokenFile),
	}
}

func validName(s string) bool {
	if s == "" {
		return false
	}
	for _, c := range s {
		if !(c >= 'a' && c <= 'z' || c >= 'A' && c <= 'Z' || c >= '0' && c <= '9' || c == '-' || c == '_' || c == '.') {
			return false
		}
	}
	return true
}

func resolvePath(p, dir string) string {
	if p == "" {
		return ""
	}
	if rest, ok := strings.CutPrefix(p, "~/"); ok {
		if home, err := os.UserHomeDir(); err == nil {
			return filepath.Join(home, rest)
		}
	}
	if filepath.IsAbs(p) {
		return p
	}
	return filepath.Join(dir, p)
}

// over fills the empty fields of e from base.
func (e endpoint) over(base endpoint) endpoint {
	pick := func(a, b string) string {
		if a != "" {
			return a
		}
		return b
	}
	return endpoint{Addr: pick(e.Addr, base.Addr), TLSCA: pick(e.TLSCA, base.TLSCA), TLSCert: pick(e.TLSCert, base.TLSCert),
		TLSKey: pick(e.TLSKey, base.TLSKey), TokenFile: pick(e.TokenFile, base.TokenFile)}
}

// target is a resolved daemon to talk to.
type target struct {
	name string // instrument name from the configuration ("" when none)
	endpoint
	token string // from $GONIO_TOKEN when no token file applies
}

// settings resolves where to connect. Precedence, highest first: command-line flags, environment variables
// (GONIO_ADDR, GONIO_TOKEN, GONIO_TOKEN_FILE, GONIO_TLS_CA, GONIO_INSTRUMENT), the named instrument's entry,
// the file's top-level defaults, the built-in default address.
func (a *app) settings() (*clientConfig, error) {
	if a.cfg != nil {
		return a.cfg, nil
	}
	path, required := a.configPath, a.configPath != ""
	if path == "" {
		path, required = os.Getenv("GONIO_CONFIG"), os.Getenv("GONIO_CONFIG") != ""
	}
	if path == "" {
		path = defaultConfigPath()
	}
	cfg, err := loadClientConfig(path, required)
	if err != nil {
		return nil, withCode(exitUsage, err)
	}
	a.cfg = cfg
	return cfg, nil
}

// resolve returns the target for the named instrument ("" = --instrument, $GONIO_INSTRUMENT or the file's
// default; none of them: the flags, environment and defaults alone). A named instrument's entry wins over the
// environment but not over flags.
func (a *app) resolve(name string) (target, error) {
	cfg, err := a.settings()
	if err != nil {
		return target{}, err
	}
	for _, n := range []string{a.instrument, os.Getenv("GONIO_INSTRUMENT"), cfg.instrument} {
		if name == "" {
			name = n
		}
	}
	flags := endpoint{Addr: a.addr, TLSCA: a.tlsCA, TLSCert: a.tlsCert, TLSKey: a.tlsKey, TokenFile: a.tokenFile}
	env := endpoint{Addr: os.Getenv("GONIO_ADDR"), TLSCA: os.Getenv("GONIO_TLS_CA"), TokenFile: os.Getenv("GONIO_TOKEN_FILE")}
	ep := flags.over(env)
	if name != "" {
		inst, ok := cfg.instruments[name]
		if !ok {
			if len(cfg.instruments) == 0 {
				return target{}, usageError("instrument %q: no instruments configured (%s)", name, cfg.path)
			}
			return target{}, usageError("instrument %q: not in %s (known: %s)", name, cfg.path, strings.Join(cfg.names(), ", "))
		}
		ep = flags.over(inst).over(env)
	}
	ep = ep.over(cfg.defaults).over(endpoint{Addr: client.DefaultAddr})
	t := target{name: name, endpoint: ep}
	if ep.TokenFile == "" {
		t.token = os.Getenv("GONIO_TOKEN")
	}
	return t, nil
}

// dial makes a client for a target.
func (a *app) dial(t target, extra ...client.Option) (*client.Client, error) {
	timeout := a.timeout
	if timeout == 0 && a.cfg != nil {
		timeout = a.cfg.timeout
	}
	if timeout == 0 {
		timeout = 30 * time.Second
	}
	opts := []client.Option{client.WithTimeout(timeout)}
	token := t.token
	if t.TokenFile != "" {
		b, err := os.ReadFile(t.TokenFile)
		if err != nil {
			return nil, withCode(exitAuth, fmt.Errorf("token file: %w", err))
		}
		token = strings.TrimSpace(string(b))
	}
	if token != "" {
		opts = append(opts, client.WithToken(token))
	}
	if t.TLSCA != "" || t.TLSCert != "" || t.TLSKey != "" {
		opts = append(opts, client.WithTLS(t.TLSCA, t.TLSCert, t.TLSKey))
	}
	return client.New(t.Addr, append(opts, extra...)...)
}
