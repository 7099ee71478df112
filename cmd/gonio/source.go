package main

import (
	"fmt"

	"github.com/spf13/cobra"

	"goniod/client"
)

func (a *app) sourceCommand() *cobra.Command {
	var kv, ma float64
	var hv string
	cmd := &cobra.Command{
		Use:   "source [--kv KV] [--ma MA] [--hv on|off]",
		Short: "Set tube voltage and current, switch high voltage (within the tube rating)",
		Long: `Changes the X-ray tube by hand. Switching high voltage on needs the interlock closed and is refused while a
scan runs; switching it off is always allowed (a running scan then pauses).`,
		Example: "  gonio source --kv 30 --ma 0.8 --hv on\n  gonio source --hv off",
		Args:    cobra.NoArgs,
		RunE: func(cmd *cobra.Command, _ []string) error {
			var ch client.SourceChange
			if cmd.Flags().Changed("kv") {
				ch.KV = &kv
			}
			if cmd.Flags().Changed("ma") {
				ch.MA = &ma
			}
			switch hv {
			case "":
			case "on", "off":
				on := hv == "on"
				ch.HighVoltage = &on
			default:
				return usageError("--hv %q: use on or off", hv)
			}
			if ch.KV == nil && ch.MA == nil && ch.HighVoltage == nil {
				return usageError("nothing to change: give --kv, --ma or --hv")
			}
			c, err := a.connect()
			if err != nil {
				return err
			}
			defer c.Close()
			s, err := c.SetSource(a.ctx, ch)
			if err != nil {
				return err
			}
			return a.printState(s, fmt.Sprintf("tube %g kV, %g mA, high voltage %s", s.KV, s.MA, onOff(s.HighVoltage)))
		},
	}
	cmd.Flags().Float64Var(&kv, "kv", 0, "tube voltage, kV")
	cmd.Flags().Float64Var(&ma, "ma", 0, "tube current, mA")
	cmd.Flags().StringVar(&hv, "hv", "", "high voltage: on or off")
	return cmd
}
