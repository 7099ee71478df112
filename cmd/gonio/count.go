package main

import (
	"fmt"
	"strconv"
	"time"

	"github.com/spf13/cobra"
)

func (a *app) countCommand() *cobra.Command {
	var dwell time.Duration
	cmd := &cobra.Command{
		Use:     "count [--dwell D]",
		Short:   "Count once at the present position",
		Example: "  gonio count --dwell 10s",
		Args:    cobra.NoArgs,
		RunE: func(cmd *cobra.Command, _ []string) error {
			c, err := a.connect()
			if err != nil {
				return err
			}
			defer c.Close()
			p, err := c.Count(a.ctx, dwell)
			if err != nil {
				return err
			}
			switch a.output {
			case outJSON:
				return a.printJSON(map[string]any{"counts": p.Counts, "dwell_s": p.Dwell, "rate_cps": p.Rate,
					"rate_err_cps": p.RateErr, "corrected_rate_cps": p.CorrectedRate, "corrected_rate_err_cps": p.CorrectedRateErr})
			case outCSV:
				return writeCSV(a.stdout, []string{"counts", "dwell_s", "rate_cps", "rate_err_cps", "corrected_rate_cps", "corrected_rate_err_cps"},
					[]string{strconv.FormatUint(p.Counts, 10), num(p.Dwell), num(p.Rate), num(p.RateErr), num(p.CorrectedRate), num(p.CorrectedRateErr)})
			}
			_, err = fmt.Fprintf(a.stdout, "%d counts in %.3g s: %.2f ± %.2f cps (dead-time corrected %.2f ± %.2f cps)\n",
				p.Counts, p.Dwell, p.Rate, p.RateErr, p.CorrectedRate, p.CorrectedRateErr)
			return err
		},
	}
	cmd.Flags().DurationVar(&dwell, "dwell", time.Second, "counting time")
	return cmd
}
