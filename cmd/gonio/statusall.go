package main

import (
	"errors"
	"fmt"
	"io"
	"slices"
	"strconv"
	"strings"
	"sync"
	"text/tabwriter"
	"time"

	"goniod/client"
)

// instrumentStatus is one instrument of `gonio status --all`: its state, or why it could not be reached.
type instrumentStatus struct {
	Name  string                  `json:"name"`
	Addr  string                  `json:"addr"`
	Error string                  `json:"error,omitempty"`
	State *client.InstrumentState `json:"-"`
}

// statusAll asks every configured instrument for its state at once; one that does not answer is marked, not
// fatal. The exit code says unavailable only when none answered.
func (a *app) statusAll() error {
	if a.addr != "" || a.instrument != "" {
		return usageError("--all shows the instruments of the configuration file: leave out --addr and --instrument")
	}
	if err := a.checkOutput(); err != nil {
		return err
	}
	cfg, err := a.settings()
	if err != nil {
		return err
	}
	names := cfg.names()
	if len(names) == 0 {
		return usageError("no instruments in %s: see `gonio help config-file`", cfg.path)
	}
	out := make([]instrumentStatus, len(names))
	var wg sync.WaitGroup
	for i, name := range names {
		wg.Go(func() { out[i] = a.askInstrument(name) })
	}
	wg.Wait()
	if err := writeStatusAll(a.stdout, a.output, out); err != nil {
		return err
	}
	for _, s := range out {
		if s.State != nil {
			return nil
		}
	}
	return withCode(exitUnavailable, errors.New("no instrument answered"))
}

func (a *app) askInstrument(name string) instrumentStatus {
	t, err := a.resolve(name)
	if err != nil {
		return instrumentStatus{Name: name, Error: err.Error()}
	}
	out := instrumentStatus{Name: name, Addr: t.Addr}
	timeout := a.timeout
	if timeout == 0 || timeout > 5*time.Second {
		timeout = 5 * time.Second
	}
	c, err := a.dial(t, client.WithRetries(0, 0), client.WithTimeout(timeout))
	if err != nil {
		out.Error = err.Error()
		return out
	}
	defer c.Close()
	s, err := c.State(a.ctx)
	if err != nil {
		out.Error = unreachableText(err)
		return out
	}
	out.State = &s
	return out
}

// unreachableText is the short reason an instrument is not shown.
func unreachableText(err error) string {
	switch {
	case errors.Is(err, client.ErrUnavailable):
		return "unreachable"
	case errors.Is(err, client.ErrUnauthenticated), errors.Is(err, client.ErrPermissionDenied):
		return "token refused"
	}
	return err.Error()
}

// writeStatusAll renders the instruments side by side: one row each, as a table, a JSON array or CSV.
func writeStatusAll(w io.Writer, format string, all []instrumentStatus) error {
	switch format {
	case outJSON:
		type view struct {
			instrumentStatus
			Reachable bool       `json:"reachable"`
			State     *stateView `json:"state,omitempty"`
		}
		out := make([]view, len(all))
		for i, s := range all {
			out[i] = view{instrumentStatus: s, Reachable: s.State != nil}
			if s.State != nil {
				v := stateViewOf(*s.State)
				out[i].State = &v
			}
		}
		return writeJSON(w, out)
	case outCSV:
		var axes []string
		for _, s := range all {
			if s.State != nil {
				for _, ax := range stateAxes(*s.State) {
					if !slices.Contains(axes, ax) {
						axes = append(axes, ax)
					}
				}
			}
		}
		rows := make([][]string, len(all))
		for i, s := range all {
			rows[i] = []string{s.Name, s.Addr, strconv.FormatBool(s.State != nil), s.Error}
			if s.State != nil {
				rows[i] = append(rows[i], stateRow(*s.State, axes)...)
			}
		}
		return writeCSV(w, append([]string{"name", "addr", "reachable", "error"}, stateColumns(axes)...), rows...)
	}
	tw := tabwriter.NewWriter(w, 0, 4, 2, ' ', 0)
	fmt.Fprintln(tw, "INSTRUMENT\tADDRESS\tLINK\tINTERLOCK\tTUBE\tRATE\tSCAN\tQUEUE\tAXES")
	for _, s := range all {
		if s.State == nil {
			fmt.Fprintf(tw, "%s\t%s\t%s\n", s.Name, s.Addr, s.Error)
			continue
		}
		st := *s.State
		scan := "-"
		if st.ScanID != "" {
			scan = st.ScanID + " " + string(st.ScanState)
		}
		var axes []string
		for _, ax := range st.Axes {
			axes = append(axes, fmt.Sprintf("%s %.3f°", ax.Name, ax.Position))
		}
		fmt.Fprintf(tw, "%s\t%s\t%s\t%s\t%g kV %g mA HV %s\t%.1f cps\t%s\t%d\t%s\n", s.Name, s.Addr, linkText(st),
			interlockText(st.InterlockClosed), st.KV, st.MA, onOff(st.HighVoltage), st.Rate, scan, st.QueueLength,
			strings.Join(axes, ", "))
	}
	return tw.Flush()
}
