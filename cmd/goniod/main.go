// Command goniod is the data-acquisition daemon for X-ray goniometer/counter instruments: it drives the
// instrument through a driver, runs queued scans, stores every point durably, streams points over gRPC and
// exports Prometheus metrics.
//
//	goniod --sim                      # on the built-in simulated instrument
//	goniod --config /etc/goniod.yaml  # as configured
package main

import (
	"context"
	"flag"
	"fmt"
	"io"
	"log/slog"
	"os"
	"os/signal"
	"runtime/debug"
	"strings"
	"syscall"

	"goniod/daemon/config"
	"goniod/daemon/server"
)

func main() {
	if os.Getenv("GOGC") == "" {
		debug.SetGCPercent(gcPercent)
	}
	if code, ok := runAsService(os.Args[1:], os.Stderr); ok {
		os.Exit(code)
	}
	os.Exit(run(os.Args[1:], os.Stderr))
}

// gcPercent is goniod's garbage-collection target unless the environment sets GOGC. Its live heap is a few MiB
// (ended scans keep only their state in memory), so Go's default (100) collects after every few MiB allocated:
// while streaming stored points, every few thousand points. 150 makes a third fewer collections, which brings a
// replay's rate from 0.73–0.76 to 0.78–0.88 of a bare gRPC server's, for about 3 MiB more resident memory
// (README, "Performance").
const gcPercent = 150

// version is the module version, or the VCS revision of a development build.
func version() string {
	bi, ok := debug.ReadBuildInfo()
	if !ok {
		return "unknown"
	}
	v := bi.Main.Version
	for _, s := range bi.Settings {
		if s.Key == "vcs.revision" && len(s.Value) >= 12 && (v == "" || v == "(devel)") {
			v = "dev-" + s.Value[:12]
		}
	}
	if v == "" {
		v = "(devel)"
	}
	return v
}

type flags struct {
	fs                                   *flag.FlagSet
	configPath                           string
	sim                                  bool
	listen, metricsListen, data          string
	simSeed                              int64
	simSpeed                             float64
	simAnode, simCrystal                 string
	serial, profile                      string
	baud                                 int
	tlsCert, tlsKey, tlsClientCA, tokens string
	insecure                             bool
	logFormat, logLevel, logFile         string
	showVersion                          bool
}

func parseFlags(args []string, stderr io.Writer) (*flags, error) {
	f := &flags{fs: flag.NewFlagSet("goniod", flag.ContinueOnError)}
	fs := f.fs
	fs.SetOutput(stderr)
	fs.Usage = func() {
		fmt.Fprintf(stderr, "goniod: data-acquisition daemon for X-ray goniometer/counter instruments\n\n"+
			"Usage:\n  goniod --sim [flags]            run on the built-in simulated instrument\n"+
			"  goniod --serial DEVICE [flags]  run on an instrument on a serial port (goniosim, or real hardware)\n"+
			"  goniod --config FILE [flags]    run as configured (flags override the file)\n\nFlags:\n")
		fs.PrintDefaults()
	}
	fs.StringVar(&f.configPath, "config", "", "configuration `file` (YAML)")
	fs.BoolVar(&f.sim, "sim", false, "use the built-in simulated instrument (driver \"sim\")")
	fs.StringVar(&f.listen, "listen", config.DefaultListen, "gRPC listen `address`; non-loopback addresses need TLS")
	fs.StringVar(&f.metricsListen, "metrics-listen", config.DefaultMetricsListen, "Prometheus /metrics listen `address`")
	fs.StringVar(&f.data, "data", "", "data `directory` (default "+config.DefaultDataDir()+")")
	fs.Int64Var(&f.simSeed, "sim-seed", 0, "simulator: seed of the random source (same seed, same counts)")
	fs.Float64Var(&f.simSpeed, "sim-speed", 1, "simulator: simulated seconds per wall second")
	fs.StringVar(&f.simAnode, "sim-anode", "Cu", "simulator: anode element (Cr, Fe, Co, Cu, Mo, Ag, W)")
	fs.StringVar(&f.simCrystal, "sim-crystal", "LiF", "simulator: analyzer crystal (LiF, NaCl, KCl, KBr, Si111, Ge111, graphite, mica)")
	fs.StringVar(&f.serial, "serial", "", "use the serial driver on this `device` (/dev/ttyUSB0, COM3, a goniosim link): drivers.serial.device")
	fs.IntVar(&f.baud, "baud", 115200, "serial: baud rate (drivers.serial.baud)")
	fs.StringVar(&f.profile, "profile", "", "serial: protocol profile `file` (drivers.serial.profile; default: goniod's own protocol)")
	fs.StringVar(&f.tlsCert, "tls-cert", "", "TLS server certificate `file` (PEM)")
	fs.StringVar(&f.tlsKey, "tls-key", "", "TLS server key `file` (PEM)")
	fs.StringVar(&f.tlsClientCA, "tls-client-ca", "", "require client certificates signed by this CA `file` (PEM)")
	fs.StringVar(&f.tokens, "tokens", "", "bearer tokens `file` (ROLE NAME TOKEN per line)")
	fs.BoolVar(&f.insecure, "insecure", false, "allow a non-loopback listen address without TLS (logged loudly)")
	fs.StringVar(&f.logFormat, "log-format", "text", "log format: text or json")
	fs.StringVar(&f.logLevel, "log-level", "info", "log level: debug, info, warn, error")
	fs.StringVar(&f.logFile, "log-file", "", "append the log to this `file` instead of standard error (e.g. as a Windows service)")
	fs.BoolVar(&f.showVersion, "version", false, "print the version and exit")
	if err := fs.Parse(args); err != nil {
		return nil, err
	}
	if fs.NArg() > 0 {
		return nil, fmt.Errorf("unexpected argument %q (flags start with --)", fs.Arg(0))
	}
	return f, nil
}

// merge applies the flags that were given over the configuration file.
func (f *flags) merge() (*config.File, error) {
	cfg := &config.File{}
	if f.configPath != "" {
		var err error
		if cfg, err = config.Load(f.configPath); err != nil {
			return nil, err
		}
	}
	set := map[string]bool{}
	f.fs.Visit(func(fl *flag.Flag) { set[fl.Name] = true })
	str := func(name string, dst *string, v string) {
		if set[name] || *dst == "" {
			*dst = v
		}
	}
	str("listen", &cfg.Listen, f.listen)
	str("metrics-listen", &cfg.MetricsListen, f.metricsListen)
	if set["data"] {
		cfg.Data = f.data
	}
	str("log-format", &cfg.Log.Format, f.logFormat)
	str("log-level", &cfg.Log.Level, f.logLevel)
	if set["log-file"] {
		cfg.Log.File = f.logFile
	}
	for name, dst := range map[string]*string{"tls-cert": &cfg.Security.TLSCert, "tls-key": &cfg.Security.TLSKey,
		"tls-client-ca": &cfg.Security.TLSClientCA, "tokens": &cfg.Security.Tokens} {
		if set[name] {
			*dst = f.fs.Lookup(name).Value.String()
		}
	}
	if set["insecure"] {
		cfg.Security.Insecure = f.insecure
	}
	if set["serial"] {
		if f.sim {
			return nil, fmt.Errorf("--sim and --serial exclude each other")
		}
		cfg.Driver = "serial"
	}
	if f.sim || cfg.Driver == "" {
		cfg.Driver = "sim"
	}
	if (set["baud"] || set["profile"]) && cfg.Driver != "serial" {
		return nil, fmt.Errorf("--baud and --profile are for the serial driver (--serial DEVICE), not %q", cfg.Driver)
	}
	if cfg.Driver == "serial" {
		for name, key := range map[string]string{"serial": "device", "baud": "baud", "profile": "profile"} {
			if !set[name] {
				continue
			}
			var v any = f.fs.Lookup(name).Value.String()
			if name == "baud" {
				v = f.baud
			}
			if err := cfg.SetDriverField("serial", key, v); err != nil {
				return nil, err
			}
		}
	}
	if cfg.Driver == "sim" {
		for name, key := range map[string]string{"sim-seed": "seed", "sim-speed": "speed", "sim-anode": "anode", "sim-crystal": "crystal"} {
			if !set[name] {
				continue
			}
			var v any = f.fs.Lookup(name).Value.String()
			switch name {
			case "sim-seed":
				v = f.simSeed
			case "sim-speed":
				v = f.simSpeed
			}
			if err := cfg.SetDriverField("sim", key, v); err != nil {
				return nil, err
			}
		}
	}
	return cfg, nil
}

func newLogger(cfg *config.File, w io.Writer) (*slog.Logger, error) {
	var level slog.Level
	if err := level.UnmarshalText([]byte(cfg.Log.Level)); err != nil {
		return nil, fmt.Errorf("log level %q: use debug, info, warn or error", cfg.Log.Level)
	}
	opts := &slog.HandlerOptions{Level: level}
	switch strings.ToLower(cfg.Log.Format) {
	case "text", "":
		return slog.New(slog.NewTextHandler(w, opts)), nil
	case "json":
		return slog.New(slog.NewJSONHandler(w, opts)), nil
	}
	return nil, fmt.Errorf("log format %q: use text or json", cfg.Log.Format)
}

// run runs goniod until SIGINT or SIGTERM.
func run(args []string, stderr io.Writer) int {
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt, syscall.SIGTERM)
	defer stop()
	return serve(ctx, args, stderr)
}

// serve runs goniod until ctx ends and returns the exit code.
func serve(ctx context.Context, args []string, stderr io.Writer) int {
	f, err := parseFlags(args, stderr)
	if err == flag.ErrHelp {
		return 0
	}
	if err != nil {
		fmt.Fprintln(stderr, "goniod:", err)
		return 2
	}
	if f.showVersion {
		fmt.Fprintln(os.Stdout, "goniod", version())
		return 0
	}
	cfg, err := f.merge()
	if err != nil {
		fmt.Fprintln(stderr, "goniod:", err)
		return 2
	}
	logTo := stderr
	if cfg.Log.File != "" {
		lf, err := os.OpenFile(cfg.Log.File, os.O_WRONLY|os.O_APPEND|os.O_CREATE, 0o640)
		if err != nil {
			fmt.Fprintln(stderr, "goniod: log file:", err)
			return 2
		}
		defer lf.Close()
		logTo = lf
	}
	log, err := newLogger(cfg, logTo)
	if err != nil {
		fmt.Fprintln(stderr, "goniod:", err)
		return 2
	}
	if err := server.Run(ctx, server.Options{Config: cfg, Version: version(), Log: log}); err != nil {
		log.Error("goniod stopped", "err", err)
		return 1
	}
	return 0
}
