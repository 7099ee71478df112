package main

import (
	"fmt"
	"strconv"

	"github.com/spf13/cobra"
)

func (a *app) moveCommand() *cobra.Command {
	return &cobra.Command{
		Use:   "move AXIS ANGLE",
		Short: "Move one axis to an angle in degrees (refused while a scan runs)",
		Long: `Moves one axis by hand, within the same limits as scans. The axis stays there for a following axis scan,
e.g. park the detector at 2θ before a rocking curve of the crystal.`,
		Example: "  gonio move twotheta 45.0\n  gonio move theta 22.5",
		Args:    cobra.ExactArgs(2),
		RunE: func(cmd *cobra.Command, args []string) error {
			deg, err := strconv.ParseFloat(args[1], 64)
			if err != nil {
				return usageError("angle %q is not a number of degrees", args[1])
			}
			c, err := a.connect()
			if err != nil {
				return err
			}
			defer c.Close()
			s, err := c.Move(a.ctx, args[0], deg)
			if err != nil {
				return err
			}
			summary := ""
			for _, ax := range s.Axes {
				if ax.Name == args[0] {
					summary = fmt.Sprintf("%s at %.4f°", ax.Name, ax.Position)
				}
			}
			return a.printState(s, summary)
		},
	}
}
