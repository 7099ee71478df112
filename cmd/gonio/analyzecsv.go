package main

import (
	"io"
	"strconv"

	"goniod/client"
)

// peakColumns are the CSV columns of a fitted peak.
var peakColumns = []string{"centre_deg", "centre_err_deg", "fwhm_deg", "fwhm_err_deg", "area", "area_err",
	"height_cps", "background_cps", "significance", "reduced_chi2", "wavelength_nm", "energy_kev"}

func peakCells(p client.Peak) []string {
	return []string{num(p.CentreDeg.Value), num(p.CentreDeg.Err), num(p.FWHMDeg.Value), num(p.FWHMDeg.Err),
		num(p.Area.Value), num(p.Area.Err), num(p.Height), num(p.Background), num(p.Significance), num(p.ReducedChi2),
		num(p.WavelengthNM), num(p.EnergyKeV)}
}

// writeResultCSV writes an analysis result as CSV: one row per peak, line, reflection or voltage.
func writeResultCSV(w io.Writer, r client.SavedResult) error {
	switch {
	case r.Peaks != nil:
		rows := make([][]string, 0, len(r.Peaks.Peaks))
		for _, p := range r.Peaks.Peaks {
			rows = append(rows, append([]string{r.ScanID, r.Peaks.Axis}, peakCells(p)...))
		}
		return writeCSV(w, append([]string{"scan_id", "axis"}, peakColumns...), rows...)
	case r.Lines != nil:
		var rows [][]string
		for _, m := range r.Lines.Matches {
			rows = append(rows, append([]string{r.ScanID, r.Lines.Anode, m.Line, strconv.Itoa(m.Order), num(m.ExpectedDeg),
				num(m.ResidualDeg), num(m.LineEnergyKeV)}, peakCells(m.Peak)...))
		}
		for _, p := range r.Lines.Unmatched {
			rows = append(rows, append([]string{r.ScanID, r.Lines.Anode, "", "", "", "", ""}, peakCells(p)...))
		}
		return writeCSV(w, append([]string{"scan_id", "anode", "line", "order", "expected_deg", "residual_deg",
			"line_energy_kev"}, peakColumns...), rows...)
	case r.Width != nil:
		x := r.Width
		return writeCSV(w, []string{"scan_id", "axis", "centre_deg", "centre_err_deg", "fwhm_fit_deg", "fwhm_fit_err_deg",
			"fwhm_interp_deg", "fwhm_interp_err_deg", "reduced_chi2"},
			[]string{r.ScanID, x.Axis, num(x.CentreDeg.Value), num(x.CentreDeg.Err), num(x.FWHMFitDeg.Value),
				num(x.FWHMFitDeg.Err), num(x.FWHMInterpDeg.Value), num(x.FWHMInterpDeg.Err), num(x.ReducedChi2)})
	case r.Lattice != nil:
		l := r.Lattice
		rows := make([][]string, 0, len(l.Used))
		for k, u := range l.Used {
			res := ""
			if k < len(l.ResidualsNM) {
				res = num(l.ResidualsNM[k])
			}
			rows = append(rows, []string{num(l.DNM.Value), num(l.DNM.Err), num(l.ReducedChi2), num(u.ThetaDeg),
				strconv.Itoa(u.Order), num(u.WavelengthNM), res})
		}
		return writeCSV(w, []string{"d_nm", "d_err_nm", "reduced_chi2", "theta_deg", "order", "wavelength_nm",
			"residual_nm"}, rows...)
	case r.Limits != nil:
		h, hErr := "", ""
		if p := r.Limits.PlanckJs; p != nil {
			h, hErr = num(p.Value), num(p.Err)
		}
		rows := make([][]string, 0, len(r.Limits.Limits))
		for _, l := range r.Limits.Limits {
			rows = append(rows, []string{l.ScanID, num(l.KV), num(l.WavelengthNM.Value), num(l.WavelengthNM.Err),
				num(l.ThetaDeg.Value), num(l.ThetaDeg.Err), h, hErr})
		}
		return writeCSV(w, []string{"scan_id", "kv", "wavelength_min_nm", "wavelength_min_err_nm", "theta_deg",
			"theta_err_deg", "planck_js", "planck_err_js"}, rows...)
	}
	return nil
}
