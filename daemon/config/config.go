// Package config reads goniod's configuration file (YAML) and merges it with command-line flags. Unknown keys
// are errors with their line number, so a misspelt limit is not silently ignored.
package config

import (
	"bytes"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"runtime"
	"time"

	"go.yaml.in/yaml/v3"

	"goniod/daemon/instrument"
)

// Default listen addresses: loopback only.
const (
	DefaultListen        = "127.0.0.1:7461"
	DefaultMetricsListen = "127.0.0.1:9461"
)

// File is the configuration file. Every field is optional.
type File struct {
	Listen        string `yaml:"listen"`
	MetricsListen string `yaml:"metrics_listen"`
	Data          string `yaml:"data"`
	Log           Log    `yaml:"log"`
	// Driver names the instrument driver ("sim", "serial", …); its settings are in the section of that name
	// under drivers.
	Driver  string               `yaml:"driver"`
	Drivers map[string]yaml.Node `yaml:"drivers"`
	// Instrument overrides what the driver says about the instrument.
	Instrument InstrumentFile `yaml:"instrument"`
	Limits     Limits         `yaml:"limits"`
	Security   Security       `yaml:"security"`
	Safety     Safety         `yaml:"safety"`
}

// Log configures logging.
type Log struct {
	Format string `yaml:"format"` // text or json
	Level  string `yaml:"level"`  // debug, info, warn, error
	// File to append the log to instead of standard error (a Windows service has none).
	File string `yaml:"file"`
}

// InstrumentFile overrides parts of the instrument description.
type InstrumentFile struct {
	Name        string             `yaml:"name"`
	Axes        []instrument.Axis  `yaml:"axes"`
	Tube        *instrument.Tube   `yaml:"tube"`
	Crystal     string             `yaml:"crystal"`
	CrystalDNM  float64            `yaml:"crystal_d_nm"`
	DeadTime    *time.Duration     `yaml:"dead_time"`
	Paralyzable *bool              `yaml:"dead_time_paralyzable"`
	ZeroOffsets map[string]float64 `yaml:"zero_offsets"`
}

// Limits bound what one request may ask, and how much one caller may ask of the daemon.
type Limits struct {
	MaxPoints int           `yaml:"max_points"`
	MaxDwell  time.Duration `yaml:"max_dwell"`
	// Per caller (token name, client certificate name, else peer host or loopback connection): unary calls per
	// second and burst
	// (0: defaults 100/s and 200; negative: no rate limit), and open streams (0: default 2048; negative: none).
	RequestsPerSecond float64 `yaml:"requests_per_second"`
	RequestBurst      int     `yaml:"request_burst"`
	StreamsPerClient  int     `yaml:"streams_per_client"`
	// Scans queued or held at one time (0: default 1000; negative: no limit): a runaway script cannot fill the
	// disk with scans that would never run.
	MaxQueued int `yaml:"max_queued"`
}

// Security configures TLS and tokens.
type Security struct {
	TLSCert     string `yaml:"tls_cert"`
	TLSKey      string `yaml:"tls_key"`
	TLSClientCA string `yaml:"tls_client_ca"`
	Tokens      string `yaml:"tokens"`
	Insecure    bool   `yaml:"insecure"`
}

// Safety configures the daemon's safety policy.
type Safety struct {
	// Switch high voltage off after this long with no scan (0: never).
	IdleHighVoltageOff time.Duration `yaml:"idle_high_voltage_off"`
	// Keep high voltage on at shutdown (default: off).
	KeepHighVoltageOnShutdown bool `yaml:"keep_high_voltage_on_shutdown"`
	// Bound on a graceful shutdown.
	ShutdownTimeout time.Duration `yaml:"shutdown_timeout"`
}

// Load reads a configuration file.
func Load(path string) (*File, error) {
	b, err := os.ReadFile(path)
	if err != nil {
		return nil, fmt.Errorf("config: %w", err)
	}
	return Parse(path, b)
}

// Parse reads configuration text; name is used in errors.
func Parse(name string, b []byte) (*File, error) {
	f := &File{}
	dec := yaml.NewDecoder(bytes.NewReader(b))
	dec.KnownFields(true)
	if err := dec.Decode(f); err != nil && !errors.Is(err, io.EOF) {
		return nil, fmt.Errorf("config %s: %w", name, err)
	}
	return f, nil
}

// DriverDecoder returns a function that decodes the named driver's section into a settings struct, rejecting
// unknown fields with their line number.
func (f *File) DriverDecoder(name string) func(v any) error {
	node, ok := f.Drivers[name]
	return func(v any) error {
		if !ok {
			return nil
		}
		var buf bytes.Buffer
		enc := yaml.NewEncoder(&buf)
		if err := enc.Encode(&node); err != nil {
			return err
		}
		dec := yaml.NewDecoder(&buf)
		dec.KnownFields(true)
		if err := dec.Decode(v); err != nil && !errors.Is(err, io.EOF) {
			return fmt.Errorf("drivers.%s (from line %d): %w", name, node.Line, err)
		}
		return nil
	}
}

// SetDriverField sets one key of a driver's section, as a command-line flag does (e.g. sim seed).
func (f *File) SetDriverField(driverName, key string, value any) error {
	if f.Drivers == nil {
		f.Drivers = map[string]yaml.Node{}
	}
	node := f.Drivers[driverName]
	if node.Kind == 0 {
		node = yaml.Node{Kind: yaml.MappingNode, Tag: "!!map"}
	}
	var val yaml.Node
	if err := val.Encode(value); err != nil {
		return err
	}
	for i := 0; i+1 < len(node.Content); i += 2 {
		if node.Content[i].Value == key {
			node.Content[i+1] = &val
			f.Drivers[driverName] = node
			return nil
		}
	}
	node.Content = append(node.Content, &yaml.Node{Kind: yaml.ScalarNode, Tag: "!!str", Value: key}, &val)
	f.Drivers[driverName] = node
	return nil
}

// DefaultDataDir is where scans go when neither flag nor file says: systemd's STATE_DIRECTORY, else the
// user's data directory (XDG_DATA_HOME or ~/.local/share on Unix, %LocalAppData% on Windows) + goniod.
func DefaultDataDir() string {
	if d := os.Getenv("STATE_DIRECTORY"); d != "" {
		return d
	}
	if runtime.GOOS == "windows" {
		if d := os.Getenv("LocalAppData"); d != "" {
			return filepath.Join(d, "goniod")
		}
	}
	if d := os.Getenv("XDG_DATA_HOME"); d != "" {
		return filepath.Join(d, "goniod")
	}
	if h, err := os.UserHomeDir(); err == nil {
		return filepath.Join(h, ".local", "share", "goniod")
	}
	return "goniod-data"
}

// Apply applies the file's instrument overrides and limits to a configuration built from the driver.
func (f *File) Apply(c *instrument.Config) error {
	in := f.Instrument
	if in.Name != "" {
		c.Name = in.Name
	}
	for _, a := range in.Axes {
		replaced := false
		for i := range c.Axes {
			if c.Axes[i].Name == a.Name {
				c.Axes[i] = a
				replaced = true
			}
		}
		if !replaced {
			c.Axes = append(c.Axes, a)
		}
	}
	for name, off := range in.ZeroOffsets {
		found := false
		for i := range c.Axes {
			if c.Axes[i].Name == name {
				c.Axes[i].ZeroOffsetDeg = off
				found = true
			}
		}
		if !found {
			return fmt.Errorf("instrument.zero_offsets: unknown axis %q", name)
		}
	}
	if in.Tube != nil {
		c.Tube = *in.Tube
	}
	if in.Crystal != "" {
		c.Crystal = in.Crystal
	}
	if in.CrystalDNM != 0 {
		c.CrystalDNM = in.CrystalDNM
	}
	if in.DeadTime != nil {
		c.DeadTime = *in.DeadTime
	}
	if in.Paralyzable != nil {
		c.DeadTimeParalyzable = *in.Paralyzable
	}
	if f.Limits.MaxPoints != 0 {
		c.MaxPoints = f.Limits.MaxPoints
	}
	if f.Limits.MaxDwell != 0 {
		c.MaxDwell = f.Limits.MaxDwell
	}
	return c.Validate()
}
