// Command goniosim is goniod's simulated X-ray instrument as a serial device: the same instrument as
// `goniod --sim`, behind goniod's line protocol (docs/protocol.md), on a pseudo-terminal or a named serial
// port. It prints the device path as its first line (and again whenever a dropped device comes back), and
// takes faults for tests from --fault and from its standard input, one a line.
//
//	goniosim --anode Cu --crystal LiF --seed 3 --link /tmp/tty-gonio   # then: goniod --serial /tmp/tty-gonio
//	goniosim --port /dev/ttyUSB1 --baud 9600                           # on a real serial port
package main

import (
	"bufio"
	"context"
	"errors"
	"flag"
	"fmt"
	"io"
	"log/slog"
	"os"
	"os/signal"
	"strings"
	"sync"
	"syscall"

	"goniod/sim"
	"goniod/sim/scpi"
)

func main() {
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt, syscall.SIGTERM)
	defer stop()
	os.Exit(run(ctx, os.Args[1:], os.Stdin, os.Stdout, os.Stderr))
}

// faultList collects repeated --fault flags.
type faultList []scpi.Fault

func (l *faultList) String() string {
	s := make([]string, len(*l))
	for i, f := range *l {
		s[i] = f.String()
	}
	return strings.Join(s, "; ")
}

func (l *faultList) Set(v string) error {
	f, err := scpi.ParseFault(v)
	if err != nil {
		return err
	}
	*l = append(*l, f)
	return nil
}

type options struct {
	cfg       sim.Config
	link      string
	port      string
	baud      int
	faults    faultList
	logLevel  string
	noControl bool
}

func parseFlags(args []string, stderr io.Writer) (*options, error) {
	o := &options{}
	fs := flag.NewFlagSet("goniosim", flag.ContinueOnError)
	fs.SetOutput(stderr)
	fs.Usage = func() {
		fmt.Fprint(stderr, "goniosim: the simulated X-ray instrument as a serial device (goniod's line protocol)\n\n"+
			"Usage:\n  goniosim [flags]                 on a pseudo-terminal; prints its path first\n"+
			"  goniosim --port DEVICE [flags]   on a named serial port\n\n"+
			"Faults (--fault, or one a line on standard input): [@DELAY | #COMMAND] ACTION, where ACTION is\n"+
			"drop[=DURATION], stall[=DURATION], mute, garble, noise[=BYTES], door=open, door=closed or trip.\n"+
			"Examples: \"@5s drop=2s\" (the device vanishes 5 s after start, for 2 s), \"#40 garble\" (the 40th reply).\n\nFlags:\n")
		fs.PrintDefaults()
	}
	fs.StringVar(&o.cfg.Anode, "anode", "Cu", "anode element (Cr, Fe, Co, Cu, Mo, Ag, W)")
	fs.StringVar(&o.cfg.Crystal, "crystal", "LiF", "analyzer crystal (LiF, NaCl, KCl, KBr, Si111, Ge111, graphite, mica)")
	fs.Int64Var(&o.cfg.Seed, "seed", 0, "seed of the random source (same seed, same counts)")
	fs.Float64Var(&o.cfg.Speed, "speed", 1, "simulated seconds per wall second")
	fs.Float64Var(&o.cfg.ThetaOffsetDeg, "theta-offset", 0, "zero offset of the theta axis, degrees (a misaligned instrument)")
	fs.Float64Var(&o.cfg.TwoThetaOffsetDeg, "twotheta-offset", 0, "zero offset of the twotheta axis, degrees")
	fs.DurationVar(&o.cfg.DeadTime, "dead-time", 0, "counter dead time (default 100µs)")
	fs.BoolVar(&o.cfg.Paralyzable, "paralyzable", false, "paralyzable dead-time model (default non-paralyzable)")
	fs.DurationVar(&o.cfg.Watchdog, "watchdog", 0, "host watchdog: high voltage off after this much host silence (default 10s; negative: none)")
	fs.StringVar(&o.link, "link", "", "also make a symbolic link to the pseudo-terminal at `PATH` (replaced on restart)")
	fs.StringVar(&o.port, "port", "", "serve this serial `DEVICE` instead of a pseudo-terminal")
	fs.IntVar(&o.baud, "baud", 0, "pace the pseudo-terminal at this baud rate, 10 bits a byte (default: unpaced); with --port, the port's rate (default 115200)")
	fs.Var(&o.faults, "fault", "inject a fault (repeatable), e.g. \"@5s drop=2s\"")
	fs.BoolVar(&o.noControl, "no-control", false, "do not read faults from standard input")
	fs.StringVar(&o.logLevel, "log-level", "info", "log level: debug, info, warn, error")
	if err := fs.Parse(args); err != nil {
		return nil, err
	}
	if fs.NArg() > 0 {
		return nil, fmt.Errorf("unexpected argument %q (flags start with --)", fs.Arg(0))
	}
	if o.port != "" && o.link != "" {
		return nil, errors.New("--link is for the pseudo-terminal; a named --port needs none")
	}
	if o.baud < 0 || o.baud > 4_000_000 {
		return nil, fmt.Errorf("--baud %d: must be within [0, 4000000]", o.baud)
	}
	return o, nil
}

func run(ctx context.Context, args []string, stdin io.Reader, stdout, stderr io.Writer) int {
	o, err := parseFlags(args, stderr)
	if errors.Is(err, flag.ErrHelp) {
		return 0
	}
	if err != nil {
		fmt.Fprintln(stderr, "goniosim:", err)
		return 2
	}
	var level slog.Level
	if err := level.UnmarshalText([]byte(o.logLevel)); err != nil {
		fmt.Fprintf(stderr, "goniosim: --log-level %q: use debug, info, warn or error\n", o.logLevel)
		return 2
	}
	log := slog.New(slog.NewTextHandler(stderr, &slog.HandlerOptions{Level: level}))
	inst, err := sim.New(o.cfg, nil)
	if err != nil {
		fmt.Fprintln(stderr, "goniosim:", err)
		return 2
	}
	pace := o.baud
	if o.port != "" {
		pace = 0 // a real port paces itself
	}
	srv := scpi.NewServer(inst, scpi.Options{Baud: pace, Seed: o.cfg.Seed, Log: log})
	defer srv.Close()
	for _, f := range o.faults {
		srv.Inject(f)
	}
	ctx, cancel := context.WithCancel(ctx)
	defer cancel()
	var wg sync.WaitGroup
	defer wg.Wait()
	if !o.noControl {
		wg.Add(1)
		go func() { defer wg.Done(); control(ctx, stdin, srv, log) }()
	}
	if o.port != "" {
		baud := o.baud
		if baud == 0 {
			baud = 115200
		}
		fmt.Fprintln(stdout, o.port)
		err = srv.ServePort(ctx, o.port, baud)
	} else {
		err = srv.ServePTY(ctx, scpi.PTYOptions{Link: o.link, Announce: func(path string) { fmt.Fprintln(stdout, path) }})
	}
	cancel()
	if err != nil {
		fmt.Fprintln(stderr, "goniosim:", err)
		return 1
	}
	return 0
}

// control reads faults from r, one a line, until r ends or ctx does. A line that does not read as a fault
// is logged and skipped.
func control(ctx context.Context, r io.Reader, srv *scpi.Server, log *slog.Logger) {
	lines := make(chan string)
	go func() { // ends when r does (standard input at EOF, or the process's end)
		defer close(lines)
		sc := bufio.NewScanner(r)
		for sc.Scan() {
			select {
			case lines <- sc.Text():
			case <-ctx.Done():
				return
			}
		}
	}()
	for {
		select {
		case <-ctx.Done():
			return
		case l, ok := <-lines:
			if !ok {
				return
			}
			if strings.TrimSpace(l) == "" {
				continue
			}
			f, err := scpi.ParseFault(l)
			if err != nil {
				log.Warn("control: not a fault", "err", err)
				continue
			}
			srv.Inject(f)
		}
	}
}
