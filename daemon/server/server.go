// Package server wires goniod together: data directory, driver, instrument controller, scan engine, gRPC
// services and the metrics endpoint, and shuts them down in order, leaving the instrument safe.
package server

import (
	"context"
	"crypto/tls"
	"crypto/x509"
	"errors"
	"fmt"
	"log/slog"
	"net"
	"net/http"
	"os"
	"sync"
	"time"

	"github.com/prometheus/client_golang/prometheus"
	"github.com/prometheus/client_golang/prometheus/collectors"
	"github.com/prometheus/client_golang/prometheus/promhttp"
	"google.golang.org/grpc"
	"google.golang.org/grpc/credentials"
	"google.golang.org/grpc/health"
	healthpb "google.golang.org/grpc/health/grpc_health_v1"
	"google.golang.org/grpc/keepalive"
	"google.golang.org/grpc/reflection"

	"goniod/daemon/api"
	"goniod/daemon/auth"
	"goniod/daemon/config"
	"goniod/daemon/engine"
	"goniod/daemon/instrument"
	"goniod/daemon/metrics"
	"goniod/daemon/safety"
	"goniod/daemon/scan"
	"goniod/daemon/store"
	"goniod/driver"
	goniodv1 "goniod/proto/goniod/v1"
)

// Options are what Run needs. The configuration file has been merged with the flags.
type Options struct {
	Config  *config.File
	Version string
	Log     *slog.Logger
	// Listeners made by the caller (tests listen on port 0); nil means listen on the configured addresses.
	Listener        net.Listener
	MetricsListener net.Listener
	// Ready is called with the addresses once the daemon serves.
	Ready func(grpcAddr, metricsAddr string)
	// Instrument opened by the caller (tests hold the simulator to inject faults); nil opens the configured
	// driver. Run does not close it.
	Instrument driver.Instrument
}

// Bounds on what the network can make the daemon hold: one request, one answer, the header list, streams per
// connection. Requests are small; inline points for analysis are the largest (about 100 bytes a point).
const (
	maxRequestBytes     = 4 << 20
	maxMessageBytes     = 16 << 20
	maxHeaderBytes      = 16 << 10
	maxStreamsPerConn   = 4096
	defaultRate         = 100
	defaultBurst        = 200
	defaultStreams      = 2048
	defaultShutdownTime = 15 * time.Second
)

// Run runs the daemon until ctx ends, then shuts down: the running scan stops between points and is
// interrupted, high voltage goes off, servers stop.
func Run(ctx context.Context, o Options) error {
	cfg, log := o.Config, o.Log
	if cfg.Data == "" {
		cfg.Data = config.DefaultDataDir()
	}
	if err := checkListen(cfg, log); err != nil {
		return err
	}
	tokens, err := loadTokens(cfg, log)
	if err != nil {
		return err
	}
	var creds credentials.TransportCredentials
	if cfg.Security.TLSCert != "" || cfg.Security.TLSKey != "" || cfg.Security.TLSClientCA != "" {
		if creds, err = serverTLS(cfg.Security); err != nil {
			return err
		}
		log.Info("TLS on", "client_certificates_required", cfg.Security.TLSClientCA != "")
	}
	st, err := store.Open(cfg.Data, log)
	if err != nil {
		return err
	}
	defer st.Close()
	log.Info("data directory", "path", cfg.Data)

	drvName, drv, err := openDriver(ctx, o)
	if err != nil {
		return err
	}
	if o.Instrument == nil {
		defer drv.Close()
	}

	icfg, err := instrumentConfig(cfg, drvName, drv)
	if err != nil {
		return err
	}
	ctl, err := instrument.NewController(drv, icfg, log.With("part", "instrument"))
	if err != nil {
		return fmt.Errorf("driver %s: %w", drvName, err)
	}
	// The controller outlives the engine so the engine can leave the instrument safe on the way out.
	ctlCtx, stopCtl := context.WithCancel(context.Background())
	var wg sync.WaitGroup
	wg.Add(1)
	go func() { defer wg.Done(); ctl.Run(ctlCtx) }()
	defer func() { stopCtl(); wg.Wait() }()

	switchOffAtStart(ctx, ctl, log)
	if id, err := ctl.Identify(ctx); err == nil {
		log.Info("instrument", "identity", id, "driver", drvName, "config_hash", icfg.Hash())
	}

	sv, err := newServices(o, st, ctl, icfg, tokens, creds)
	if err != nil {
		return err
	}
	lis, mlis, err := listen(o)
	if err != nil {
		return err
	}
	return sv.serve(ctx, o, ctl, lis, mlis, drvName)
}

// serve runs the engine, the safety monitor and both servers until ctx ends or a server fails, then shuts down
// in order: stop new work, let the running scan finish its point and mark it interrupted, switch high voltage
// off, close the servers.
func (sv *services) serve(ctx context.Context, o Options, ctl *instrument.Controller, lis, mlis net.Listener, drvName string) error {
	cfg, log := o.Config, o.Log
	hsrv := metricsServer(sv.reg)
	engCtx, stopEng := context.WithCancel(context.Background())
	errs := make(chan error, 2)
	var engDone sync.WaitGroup
	engDone.Add(2)
	go func() { defer engDone.Done(); sv.eng.Run(engCtx) }()
	go func() { defer engDone.Done(); sv.mon.Run(engCtx) }()
	go func() { errs <- sv.gs.Serve(lis) }()
	go func() {
		if err := hsrv.Serve(mlis); !errors.Is(err, http.ErrServerClosed) {
			errs <- err
		}
	}()
	log.Info("goniod serving", "listen", lis.Addr().String(), "metrics", mlis.Addr().String(), "driver", drvName)
	if o.Ready != nil {
		o.Ready(lis.Addr().String(), mlis.Addr().String())
	}

	var runErr error
	select {
	case <-ctx.Done():
		log.Info("shutting down")
	case runErr = <-errs:
		log.Error("server failed", "err", runErr)
	}
	sv.hs.Shutdown()
	drain(sv.eng, cfg.Safety.ShutdownTimeout, log)
	stopEng()
	engDone.Wait()
	if !cfg.Safety.KeepHighVoltageOnShutdown {
		switchOffAtShutdown(ctl, log)
	}
	stopServers(sv.gs, hsrv)
	return runErr
}

// services are the daemon's parts above the instrument controller.
type services struct {
	reg *prometheus.Registry
	eng *engine.Engine
	mon *safety.Monitor
	gs  *grpc.Server
	hs  *health.Server
}

// newServices builds the metrics, the scan engine, the safety monitor and the gRPC server with its guard.
func newServices(o Options, st *store.Store, ctl *instrument.Controller, icfg instrument.Config, tokens *auth.Tokens,
	creds credentials.TransportCredentials) (*services, error) {
	cfg, log := o.Config, o.Log
	sv := &services{reg: prometheus.NewRegistry()}
	sv.reg.MustRegister(collectors.NewGoCollector(), collectors.NewProcessCollector(collectors.ProcessCollectorOpts{}))
	m := metrics.New(sv.reg, ctl, scanCounter(func() map[scan.State]int { return sv.eng.CountByState() }))
	var err error
	sv.eng, err = engine.New(engine.Options{Store: st, Controller: ctl, Log: log.With("part", "engine"), Observer: m, Version: o.Version,
		MaxQueued: maxQueued(cfg.Limits.MaxQueued)})
	if err != nil {
		return nil, err
	}
	sv.mon = safety.New(safety.Options{Instrument: ctl, Scans: sv.eng, Recorder: m, Log: log.With("part", "safety"),
		IdleHighVoltageOff: cfg.Safety.IdleHighVoltageOff})
	m.KnowSafetyEvents(safety.Events...)
	guard := auth.NewGuard(auth.Options{Tokens: tokens, Log: log.With("part", "audit"), Limits: callerLimits(cfg.Limits), OnControl: sv.mon.Touch})
	sv.gs = grpc.NewServer(serverOptions(creds, metrics.NewGRPC(sv.reg), guard)...)
	goniodv1.RegisterScansServer(sv.gs, &api.ScanService{Engine: sv.eng})
	goniodv1.RegisterInstrumentServer(sv.gs, &api.InstrumentService{Engine: sv.eng, Controller: ctl, Version: o.Version})
	goniodv1.RegisterAnalysisServer(sv.gs, &api.AnalysisService{Scans: sv.eng, Results: st, CrystalAxis: icfg.CrystalAxis()})
	sv.hs = health.NewServer()
	healthpb.RegisterHealthServer(sv.gs, sv.hs)
	reflection.Register(sv.gs)
	return sv, nil
}

// openDriver returns the instrument the caller holds, or opens the configured driver ("sim" by default).
func openDriver(ctx context.Context, o Options) (string, driver.Instrument, error) {
	name := o.Config.Driver
	if name == "" {
		name = "sim"
	}
	if o.Instrument != nil {
		return name, o.Instrument, nil
	}
	ctx, cancel := context.WithTimeout(ctx, 30*time.Second)
	defer cancel()
	drv, err := driver.Open(ctx, name, driver.Params{Decode: o.Config.DriverDecoder(name), Logger: o.Log.With("driver", name)})
	return name, drv, err
}

// switchOffAtStart leaves no high voltage on from before the daemon's start: goniod never switches it on by
// itself.
func switchOffAtStart(ctx context.Context, ctl *instrument.Controller, log *slog.Logger) {
	ctx, cancel := context.WithTimeout(ctx, 10*time.Second)
	defer cancel()
	if err := ctl.SetHighVoltage(ctx, false); err != nil {
		log.Warn("could not switch high voltage off at start", "err", err)
		return
	}
	log.Info("high voltage off at start (goniod never switches it on by itself)")
}

// switchOffAtShutdown switches high voltage off, halting the instrument when it does not answer.
func switchOffAtShutdown(ctl *instrument.Controller, log *slog.Logger) {
	ctx, cancel := context.WithTimeout(context.Background(), 5*time.Second)
	defer cancel()
	if err := ctl.SetHighVoltage(ctx, false); err != nil {
		log.Warn("high voltage off at shutdown failed; halting", "err", err)
		_ = ctl.Halt()
		return
	}
	log.Info("high voltage off at shutdown")
}

// listen returns the gRPC and metrics listeners: the caller's, or new ones on the configured addresses.
func listen(o Options) (lis, mlis net.Listener, err error) {
	cfg := o.Config
	lis, mlis = o.Listener, o.MetricsListener
	if lis == nil {
		if lis, err = net.Listen("tcp", cfg.Listen); err != nil {
			return nil, nil, fmt.Errorf("listen %s: %w", cfg.Listen, err)
		}
	}
	if mlis == nil {
		if mlis, err = net.Listen("tcp", cfg.MetricsListen); err != nil {
			lis.Close()
			return nil, nil, fmt.Errorf("metrics listen %s: %w", cfg.MetricsListen, err)
		}
	}
	return lis, mlis, nil
}

// metricsServer serves /metrics from reg, bounded in time, size and concurrent scrapes.
func metricsServer(reg *prometheus.Registry) *http.Server {
	mux := http.NewServeMux()
	mux.Handle("/metrics", promhttp.HandlerFor(reg, promhttp.HandlerOpts{Registry: reg, MaxRequestsInFlight: 8, Timeout: 10 * time.Second}))
	return &http.Server{Handler: mux, ReadHeaderTimeout: 10 * time.Second, ReadTimeout: 10 * time.Second,
		WriteTimeout: 30 * time.Second, MaxHeaderBytes: 1 << 16}
}

// stopServers lets open calls finish for a few seconds, then cuts them.
func stopServers(gs *grpc.Server, hsrv *http.Server) {
	stopped := make(chan struct{})
	go func() { gs.GracefulStop(); close(stopped) }()
	select {
	case <-stopped:
	case <-time.After(3 * time.Second):
		gs.Stop()
	}
	ctx, cancel := context.WithTimeout(context.Background(), 2*time.Second)
	defer cancel()
	_ = hsrv.Shutdown(ctx)
}

// serverOptions bound what the network can make the daemon hold, and put the gRPC metrics and the guard in
// front of every call (the metrics first, so that refused calls are counted too).
func serverOptions(creds credentials.TransportCredentials, gm *metrics.GRPC, guard *auth.Guard) []grpc.ServerOption {
	opts := []grpc.ServerOption{grpc.MaxRecvMsgSize(maxRequestBytes), grpc.MaxSendMsgSize(maxMessageBytes),
		grpc.MaxHeaderListSize(maxHeaderBytes), grpc.MaxConcurrentStreams(maxStreamsPerConn),
		grpc.ConnectionTimeout(10 * time.Second),
		grpc.KeepaliveEnforcementPolicy(keepalive.EnforcementPolicy{MinTime: 10 * time.Second, PermitWithoutStream: true}),
		grpc.ChainUnaryInterceptor(gm.Unary, guard.Unary), grpc.ChainStreamInterceptor(gm.Stream, guard.Stream)}
	if creds != nil {
		opts = append(opts, grpc.Creds(creds))
	}
	return opts
}

// drain lets the running scan stop after its current point, waiting at most the shutdown timeout; after
// that the point in progress is cut short. Either way every durable point is kept.
func drain(eng *engine.Engine, limit time.Duration, log *slog.Logger) {
	if limit <= 0 {
		limit = defaultShutdownTime
	}
	if rec, ok := eng.Running(); ok {
		log.Info("stopping the running scan after its current point", "scan", rec.ID, "wait_at_most", limit)
	}
	ctx, cancel := context.WithTimeout(context.Background(), limit)
	defer cancel()
	if err := eng.Drain(ctx); err != nil {
		log.Warn("the current point did not end in time; cutting it short (earlier points are stored)", "waited", limit)
	}
}

// scanCounter adapts a function to metrics.Scans (the engine is made after the metrics, which observe it).
type scanCounter func() map[scan.State]int

func (f scanCounter) CountByState() map[scan.State]int { return f() }

// defaultMaxQueued is how many scans may wait to run when the configuration does not say.
const defaultMaxQueued = 1000

// maxQueued applies the default to the configured limit on waiting scans; negative switches it off.
func maxQueued(n int) int {
	switch {
	case n == 0:
		return defaultMaxQueued
	case n < 0:
		return 0
	}
	return n
}

// callerLimits applies the defaults to the configured per-caller limits; negative values switch a limit off.
func callerLimits(l config.Limits) auth.Limits {
	out := auth.Limits{RequestsPerSecond: l.RequestsPerSecond, Burst: l.RequestBurst, Streams: l.StreamsPerClient}
	if out.RequestsPerSecond == 0 {
		out.RequestsPerSecond = defaultRate
	}
	if out.Burst == 0 {
		out.Burst = defaultBurst
	}
	if out.Streams == 0 {
		out.Streams = defaultStreams
	}
	return out
}

// loadTokens reads the tokens file, if one is configured, and says what protects the API.
func loadTokens(cfg *config.File, log *slog.Logger) (*auth.Tokens, error) {
	sec := cfg.Security
	if sec.Tokens == "" {
		if host, _, _ := net.SplitHostPort(cfg.Listen); !isLoopback(host) && sec.TLSClientCA == "" {
			log.Warn("no tokens file and no client certificates: everyone who can reach the daemon can control the instrument", "listen", cfg.Listen)
		}
		return nil, nil
	}
	t, err := auth.LoadTokens(sec.Tokens)
	if err != nil {
		return nil, err
	}
	if host, _, _ := net.SplitHostPort(cfg.Listen); !isLoopback(host) && sec.TLSCert == "" {
		log.Warn("INSECURE: bearer tokens travel unencrypted on the network (no TLS)", "listen", cfg.Listen)
	}
	log.Info("tokens loaded; calls need a bearer token", "file", sec.Tokens, "tokens", t.Len())
	return t, nil
}

// instrumentConfig builds the effective instrument configuration: the driver's description, then the file.
func instrumentConfig(cfg *config.File, drvName string, drv driver.Instrument) (instrument.Config, error) {
	var desc driver.Description
	if d, ok := drv.(driver.Describer); ok {
		desc = d.Describe()
	}
	name := cfg.Instrument.Name
	if name == "" {
		name = drvName
	}
	ic := instrument.FromDescription(name, drvName, desc)
	if err := cfg.Apply(&ic); err != nil {
		return ic, fmt.Errorf("instrument configuration: %w", err)
	}
	return ic, nil
}

// serverTLS loads the server certificate and, when given, the CA that client certificates must chain to.
func serverTLS(sec config.Security) (credentials.TransportCredentials, error) {
	if sec.TLSCert == "" || sec.TLSKey == "" {
		return nil, errors.New("TLS needs both --tls-cert and --tls-key")
	}
	cert, err := tls.LoadX509KeyPair(sec.TLSCert, sec.TLSKey)
	if err != nil {
		return nil, fmt.Errorf("TLS certificate: %w", err)
	}
	tc := &tls.Config{Certificates: []tls.Certificate{cert}, MinVersion: tls.VersionTLS12}
	if sec.TLSClientCA != "" {
		pem, err := os.ReadFile(sec.TLSClientCA)
		if err != nil {
			return nil, fmt.Errorf("TLS client CA: %w", err)
		}
		pool := x509.NewCertPool()
		if !pool.AppendCertsFromPEM(pem) {
			return nil, fmt.Errorf("TLS client CA %s: no PEM certificates", sec.TLSClientCA)
		}
		tc.ClientCAs, tc.ClientAuth = pool, tls.RequireAndVerifyClientCert
	}
	return credentials.NewTLS(tc), nil
}

// checkListen refuses a non-loopback gRPC listen address without TLS unless insecure is set explicitly.
func checkListen(cfg *config.File, log *slog.Logger) error {
	host, _, err := net.SplitHostPort(cfg.Listen)
	if err != nil {
		return fmt.Errorf("listen %q: %w", cfg.Listen, err)
	}
	if isLoopback(host) {
		return nil
	}
	switch {
	case cfg.Security.TLSCert != "" && cfg.Security.TLSKey != "":
		return nil
	case cfg.Security.Insecure:
		log.Warn("INSECURE: serving on a non-loopback address without TLS; anyone on the network can read and, without tokens, control the instrument", "listen", cfg.Listen)
		return nil
	}
	return fmt.Errorf("listen %s is not a loopback address: it needs TLS (--tls-cert and --tls-key), or --insecure to serve without TLS on purpose", cfg.Listen)
}

func isLoopback(host string) bool {
	if host == "localhost" {
		return true
	}
	ip := net.ParseIP(host)
	return ip != nil && ip.IsLoopback()
}
