package main

import (
	"fmt"
	"io"
	"strconv"
	"text/tabwriter"

	"github.com/spf13/cobra"

	"goniod/client"
)

func (a *app) configCommand() *cobra.Command {
	return &cobra.Command{
		Use:   "config",
		Short: "Show the instrument as the daemon enforces it: axes and limits, tube rating, crystal, dead time",
		Long: `Shows the daemon's instrument configuration: every axis with its soft limits, resolution, zero offset and
coupling ratio, the tube's anode and rating, the analyzer crystal, the counter's dead time and the limits on a
scan. (gonio's own configuration file is described by ` + "`gonio help config-file`" + `.)`,
		Example: `  gonio config
  gonio config --output json
  gonio --instrument bench-b config`,
		Args: cobra.NoArgs,
		RunE: func(cmd *cobra.Command, _ []string) error {
			c, err := a.connect()
			if err != nil {
				return err
			}
			defer c.Close()
			cfg, err := c.Config(a.ctx)
			if err != nil {
				return err
			}
			return writeInstrumentConfig(a.stdout, a.output, cfg)
		},
	}
}

// configView is the instrument configuration's JSON form.
type configView struct {
	Instrument  string     `json:"instrument"`
	Driver      string     `json:"driver"`
	Axes        []axisView `json:"axes"`
	Anode       string     `json:"anode"`
	MaxKV       float64    `json:"max_kv"`
	MaxMA       float64    `json:"max_ma"`
	MaxPowerW   float64    `json:"max_power_w"`
	Crystal     string     `json:"crystal,omitempty"`
	CrystalDNM  float64    `json:"crystal_d_nm,omitempty"`
	DeadTimeS   float64    `json:"dead_time_s"`
	Paralyzable bool       `json:"dead_time_paralyzable"`
	MaxPoints   int        `json:"max_points"`
	MaxDwellS   float64    `json:"max_dwell_s"`
	ConfigHash  string     `json:"config_hash"`
}

type axisView struct {
	Name          string  `json:"name"`
	MinDeg        float64 `json:"min_deg"`
	MaxDeg        float64 `json:"max_deg"`
	ResolutionDeg float64 `json:"resolution_deg"`
	ZeroOffsetDeg float64 `json:"zero_offset_deg"`
	Coupling      float64 `json:"coupling"`
}

func configViewOf(c client.InstrumentConfig) configView {
	v := configView{Instrument: c.Instrument, Driver: c.Driver, Anode: c.Anode, MaxKV: c.MaxKV, MaxMA: c.MaxMA,
		MaxPowerW: c.MaxPowerW, Crystal: c.Crystal, CrystalDNM: c.CrystalDNM, DeadTimeS: c.DeadTime.Seconds(),
		Paralyzable: c.Paralyzable, MaxPoints: c.MaxPoints, MaxDwellS: c.MaxDwell.Seconds(), ConfigHash: c.ConfigHash,
		Axes: []axisView{}}
	for _, ax := range c.Axes {
		v.Axes = append(v.Axes, axisView(ax))
	}
	return v
}

// writeInstrumentConfig renders the configuration: a table, one JSON object, or CSV (one row per axis, the
// instrument's fields repeated).
func writeInstrumentConfig(w io.Writer, format string, c client.InstrumentConfig) error {
	switch format {
	case outJSON:
		return writeJSON(w, configViewOf(c))
	case outCSV:
		head := []string{"instrument", "driver", "axis", "min_deg", "max_deg", "resolution_deg", "zero_offset_deg",
			"coupling", "anode", "max_kv", "max_ma", "max_power_w", "crystal", "crystal_d_nm", "dead_time_s",
			"dead_time_paralyzable", "max_points", "max_dwell_s", "config_hash"}
		var rows [][]string
		for _, ax := range c.Axes {
			rows = append(rows, []string{c.Instrument, c.Driver, ax.Name, num(ax.MinDeg), num(ax.MaxDeg),
				num(ax.ResolutionDeg), num(ax.ZeroOffsetDeg), num(ax.Coupling), c.Anode, num(c.MaxKV), num(c.MaxMA),
				num(c.MaxPowerW), c.Crystal, num(c.CrystalDNM), num(c.DeadTime.Seconds()),
				strconv.FormatBool(c.Paralyzable), strconv.Itoa(c.MaxPoints), num(c.MaxDwell.Seconds()), c.ConfigHash})
		}
		return writeCSV(w, head, rows...)
	}
	tw := tabwriter.NewWriter(w, 0, 4, 2, ' ', 0)
	fmt.Fprintf(tw, "instrument\t%s (driver %s, config %s)\n", c.Instrument, c.Driver, c.ConfigHash)
	fmt.Fprintln(tw, "axis\tlimits\tresolution\tzero offset\tcoupling")
	for _, ax := range c.Axes {
		coupling := "-"
		if ax.Coupling != 0 {
			coupling = fmt.Sprintf("%g", ax.Coupling)
		}
		fmt.Fprintf(tw, "%s\t%g° to %g°\t%g°\t%+.4f°\t%s\n", ax.Name, ax.MinDeg, ax.MaxDeg, ax.ResolutionDeg, ax.ZeroOffsetDeg, coupling)
	}
	fmt.Fprintf(tw, "tube\t%s anode, at most %g kV, %g mA, %g W\n", c.Anode, c.MaxKV, c.MaxMA, c.MaxPowerW)
	if c.Crystal != "" || c.CrystalDNM != 0 {
		fmt.Fprintf(tw, "crystal\t%s, d = %g nm\n", c.Crystal, c.CrystalDNM)
	} else {
		fmt.Fprintln(tw, "crystal\tnot configured (no wavelengths or energies)")
	}
	model := "non-paralyzable"
	if c.Paralyzable {
		model = "paralyzable"
	}
	fmt.Fprintf(tw, "dead time\t%v (%s)\n", c.DeadTime, model)
	fmt.Fprintf(tw, "scan limits\tat most %d points, %v per point\n", c.MaxPoints, c.MaxDwell)
	return tw.Flush()
}
