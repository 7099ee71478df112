package main

import (
	"context"
	"errors"
	"fmt"
	"io"
	"os"
	"os/signal"
	"strings"
	"syscall"
	"time"

	"github.com/spf13/cobra"

	"goniod/client"
)

// Exit codes scripts can rely on (documented in the README and in `gonio help exit-codes`).
const (
	exitOK          = 0
	exitError       = 1 // any other error
	exitUsage       = 2 // bad command line or a request the daemon refused as invalid
	exitNotFound    = 3 // no such scan, series or result
	exitRefused     = 4 // not allowed now: a scan runs, wrong scan state, interlock open
	exitUnavailable = 5 // daemon or instrument link unreachable
	exitAuth        = 6 // missing, unknown or under-privileged token
	exitScanFailed  = 7 // the scan waited for ended failed or cancelled
)

// app holds the global flags and the streams.
type app struct {
	addr                   string
	output                 string
	configPath, instrument string
	cfg                    *clientConfig
	token, tokenFile       string
	tlsCA, tlsCert, tlsKey string
	timeout                time.Duration
	stdin                  io.Reader
	stdout, stderr         io.Writer
	ctx                    context.Context
}

// exitError carries an exit code through cobra.
type codedError struct {
	code int
	err  error
}

func (e *codedError) Error() string { return e.err.Error() }
func (e *codedError) Unwrap() error { return e.err }

func withCode(code int, err error) error { return &codedError{code: code, err: err} }

// usageError marks a bad command line.
func usageError(format string, args ...any) error {
	return withCode(exitUsage, fmt.Errorf(format, args...))
}

func execute(args []string, stdin io.Reader, stdout, stderr io.Writer) int {
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt, syscall.SIGTERM)
	defer stop()
	return executeContext(ctx, args, stdin, stdout, stderr)
}

// executeContext runs gonio until ctx ends (an interrupt, in main).
func executeContext(ctx context.Context, args []string, stdin io.Reader, stdout, stderr io.Writer) int {
	a := &app{stdin: stdin, stdout: stdout, stderr: stderr, ctx: ctx}
	root := a.rootCommand()
	root.SetArgs(args)
	root.SetOut(stdout)
	root.SetErr(stderr)
	err := root.ExecuteContext(ctx)
	if err == nil {
		return exitOK
	}
	code := exitCode(err)
	fmt.Fprintln(stderr, "gonio:", describe(err))
	return code
}

// describe renders an error with its field details.
func describe(err error) string {
	fields := client.FieldErrors(err)
	if len(fields) == 0 {
		return err.Error()
	}
	var b strings.Builder
	b.WriteString("request refused:")
	for _, f := range fields {
		fmt.Fprintf(&b, "\n  %s: %s", f.Field, f.Reason)
	}
	return b.String()
}

func exitCode(err error) int {
	var ce *codedError
	if errors.As(err, &ce) {
		return ce.code
	}
	switch {
	case errors.Is(err, client.ErrInvalid):
		return exitUsage
	case errors.Is(err, client.ErrNotFound):
		return exitNotFound
	case errors.Is(err, client.ErrRefused):
		return exitRefused
	case errors.Is(err, client.ErrUnavailable):
		return exitUnavailable
	case errors.Is(err, client.ErrUnauthenticated), errors.Is(err, client.ErrPermissionDenied):
		return exitAuth
	}
	if strings.Contains(err.Error(), "unknown command") || strings.Contains(err.Error(), "flag") ||
		strings.Contains(err.Error(), "arg(s)") {
		return exitUsage
	}
	return exitError
}

func (a *app) rootCommand() *cobra.Command {
	root := &cobra.Command{
		Use:   "gonio",
		Short: "Client of goniod, the X-ray goniometer data-acquisition daemon",
		Long: `gonio submits scans to goniod, follows them live, fetches their points as CSV or JSON,
and steers the queue and the instrument.

Where the daemon is: --addr, else the instrument named by --instrument (or $GONIO_INSTRUMENT, or the
configuration file's default; see ` + "`gonio help config-file`" + `), else $GONIO_ADDR, else the file's addr,
else ` + client.DefaultAddr + `. Exit codes are listed by ` + "`gonio help exit-codes`" + `.`,
		Example: `  gonio status
  gonio scan coupled --from 10 --to 55 --step 0.1 --dwell 1s --kv 30 --ma 0.8
  gonio fetch scan-000001 --format csv -o scan1.csv`,
		SilenceUsage:  true,
		SilenceErrors: true,
	}
	pf := root.PersistentFlags()
	pf.StringVar(&a.addr, "addr", "", "goniod address host:port (env GONIO_ADDR; default "+client.DefaultAddr+")")
	pf.StringVar(&a.instrument, "instrument", "", "instrument `name` from the configuration file (env GONIO_INSTRUMENT)")
	pf.StringVar(&a.configPath, "config", "", "configuration `file` (env GONIO_CONFIG; default ~/.config/gonio/config.yaml)")
	pf.StringVarP(&a.output, "output", "O", "table", "output format: table, json or csv (where data is printed)")
	pf.StringVar(&a.tokenFile, "token-file", "", "`file` holding the bearer token (env GONIO_TOKEN_FILE; or the token itself in GONIO_TOKEN)")
	pf.StringVar(&a.tlsCA, "tls-ca", "", "connect with TLS, trusting this CA `file` (PEM)")
	pf.StringVar(&a.tlsCert, "tls-cert", "", "client certificate `file` (PEM) for TLS")
	pf.StringVar(&a.tlsKey, "tls-key", "", "client key `file` (PEM) for TLS")
	pf.DurationVar(&a.timeout, "timeout", 0, "time limit of each call, default 30s (streams run until they end)")
	root.AddCommand(
		a.scanCommand(), a.watchCommand(), a.listCommand(), a.showCommand(), a.statusCommand(), a.fetchCommand(),
		a.pauseCommand(), a.resumeCommand(), a.cancelCommand(), a.releaseCommand(),
		a.moveCommand(), a.sourceCommand(), a.countCommand(), a.analyzeCommand(),
		a.seriesCommand(), a.configCommand(), a.convertCommand(), a.plotCommand(), a.runCommand(),
		a.alignCommand(),
	)
	root.AddCommand(helpTopics()...)
	registerCompletions(a, root)
	return root
}

// connect makes a client for the chosen instrument from the flags, environment and configuration file.
func (a *app) connect() (*client.Client, error) {
	if err := a.checkOutput(); err != nil {
		return nil, err
	}
	t, err := a.resolve("")
	if err != nil {
		return nil, err
	}
	return a.dial(t)
}

// printJSON writes v as one JSON line.
func (a *app) printJSON(v any) error {
	return writeJSON(a.stdout, v)
}

// isTerminal reports whether w is a terminal (for live, in-place output).
func isTerminal(w io.Writer) bool {
	f, ok := w.(*os.File)
	if !ok {
		return false
	}
	st, err := f.Stat()
	return err == nil && st.Mode()&os.ModeCharDevice != 0
}
