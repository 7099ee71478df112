package main

import "github.com/spf13/cobra"

// helpTopics are `gonio help TOPIC` pages: commands with no action of their own.
func helpTopics() []*cobra.Command {
	return []*cobra.Command{
		{
			Use:   "exit-codes",
			Short: "The exit codes gonio returns, for scripts",
			Long: `gonio's exit code says what happened, so that scripts can act on it:

  0  success
  1  any other error
  2  bad command line, bad plan or configuration file, or a request the daemon refused as invalid
     (the message names the field and the allowed range)
  3  no such scan, series or result
  4  refused in the present state (a scan runs, the scan's state does not allow it, interlock open, the queue
     full, too many calls)
  5  daemon or instrument link unreachable (status --all: no instrument answered)
  6  missing, unknown or under-privileged token
  7  the scan (or one scan of the plan or series) that gonio waited for ended failed or cancelled`,
			Example: `  gonio watch scan-000012; [ $? -eq 7 ] && echo "scan failed or was cancelled"`,
		},
		{
			Use:   "config-file",
			Short: "gonio's configuration file: addresses, TLS, tokens, several instruments",
			Long: `gonio reads ~/.config/gonio/config.yaml ($XDG_CONFIG_HOME/gonio/config.yaml; another file with --config or
$GONIO_CONFIG). Every key is optional; relative paths are relative to the file, ~/ is the home directory.

  addr: 127.0.0.1:7461          # the daemon when no instrument is named
  tls_ca: ca.pem                # connect with TLS trusting this CA (tls_cert, tls_key: client certificate)
  token_file: ~/.config/gonio/token
  timeout: 30s                  # time limit of each call
  instrument: bench-a           # the instrument used when none is named
  instruments:                  # one daemon per instrument; each entry takes the keys above
    bench-a: {addr: bench-a.lab.internal:7461, token_file: bench-a.token}
    bench-b: {addr: bench-b.lab.internal:7461, tls_ca: lab-ca.pem}

Precedence, highest first: command-line flags (--addr, --token-file, --tls-ca, …), then the named instrument's
entry (--instrument NAME or $GONIO_INSTRUMENT), then the environment ($GONIO_ADDR, $GONIO_TOKEN_FILE,
$GONIO_TOKEN, $GONIO_TLS_CA), then the file's top-level keys, then 127.0.0.1:7461.
Mistakes are reported with their line, e.g. "config.yaml:4: instruments.bench-a.adr: unknown key".`,
			Example: `  gonio --instrument bench-b status
  gonio status --all
  GONIO_INSTRUMENT=bench-a gonio list`,
		},
		{
			Use:   "plans",
			Short: "Plan files for gonio run: a sequence of scans or a series, in YAML",
			Long:  planHelp,
			Example: `  gonio run lif-batch7.yaml
  gonio run lif-batch7.yaml --check
  gonio run lif-batch7.yaml --detach`,
		},
	}
}
