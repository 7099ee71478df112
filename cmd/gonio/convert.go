package main

import (
	"fmt"
	"io"
	"strconv"
	"text/tabwriter"

	"github.com/spf13/cobra"

	"goniod/client"
)

func (a *app) convertCommand() *cobra.Command {
	var o client.ConvertOptions
	var wavelengths bool
	cmd := &cobra.Command{
		Use:   "convert ANGLE... | convert --wavelength NM...",
		Short: "Convert crystal angles θ to wavelength and photon energy (Bragg's law, E = hc/λ), or back",
		Long: `Converts crystal angles θ in degrees to the wavelength nλ = 2d sin θ reflected in the given order and its
photon energy E = hc/λ, or, with --wavelength, wavelengths in nm to the crystal angles that reflect them. The
crystal is the instrument's unless --crystal or --d-nm names another.`,
		Example: `  gonio convert 22.5 20.2
  gonio convert 45.1 --order 2 --crystal LiF
  gonio convert --wavelength 0.15406 0.13922 --crystal NaCl
  gonio convert 30 --d-nm 0.2014 --output json`,
		Args: cobra.MinimumNArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			values := make([]float64, len(args))
			for i, s := range args {
				v, err := strconv.ParseFloat(s, 64)
				if err != nil {
					return usageError("%q is not a number", s)
				}
				values[i] = v
			}
			if o.Order < 0 {
				return usageError("--order %d: must be ≥ 1", o.Order)
			}
			c, err := a.connect()
			if err != nil {
				return err
			}
			defer c.Close()
			if o.Crystal == "" && o.CrystalDNM == 0 {
				cfg, err := c.Config(a.ctx)
				if err != nil {
					return err
				}
				if cfg.Crystal == "" && cfg.CrystalDNM == 0 {
					return usageError("the instrument has no crystal configured: give --crystal or --d-nm")
				}
				o.Crystal, o.CrystalDNM = cfg.Crystal, cfg.CrystalDNM
				if o.Crystal != "" {
					o.CrystalDNM = 0
				}
			}
			var r client.Conversions
			if wavelengths {
				r, err = c.ConvertWavelengths(a.ctx, values, o)
			} else {
				r, err = c.ConvertAngles(a.ctx, values, o)
			}
			if err != nil {
				return err
			}
			return writeConversions(a.stdout, a.output, r)
		},
	}
	cmd.Flags().StringVar(&o.Crystal, "crystal", "", "analyzer crystal by name, e.g. LiF, NaCl, Si111 (default: the instrument's)")
	cmd.Flags().Float64Var(&o.CrystalDNM, "d-nm", 0, "lattice plane spacing d in nm instead of a crystal name")
	cmd.Flags().IntVar(&o.Order, "order", 1, "diffraction order n")
	cmd.Flags().Float64Var(&o.ThetaOffsetDeg, "offset", 0, "zero offset in degrees subtracted from each angle")
	cmd.Flags().BoolVar(&wavelengths, "wavelength", false, "the arguments are wavelengths in nm; print their angles")
	return cmd
}

func writeConversions(w io.Writer, format string, r client.Conversions) error {
	switch format {
	case outJSON:
		return writeJSON(w, r)
	case outCSV:
		rows := make([][]string, len(r.Points))
		for i, p := range r.Points {
			rows[i] = []string{num(p.ThetaDeg), strconv.Itoa(r.Order), num(p.WavelengthNM), num(p.EnergyKeV)}
		}
		return writeCSV(w, []string{"theta_deg", "order", "wavelength_nm", "energy_kev"}, rows...)
	}
	tw := tabwriter.NewWriter(w, 0, 4, 2, ' ', tabwriter.AlignRight)
	fmt.Fprintf(tw, "θ (°)\tλ (nm)\tE (keV)\t\n")
	for _, p := range r.Points {
		fmt.Fprintf(tw, "%.4f\t%.6f\t%.4f\t\n", p.ThetaDeg, p.WavelengthNM, p.EnergyKeV)
	}
	if err := tw.Flush(); err != nil {
		return err
	}
	_, err := fmt.Fprintf(w, "d = %g nm, order %d\n", r.CrystalDNM, r.Order)
	return err
}
