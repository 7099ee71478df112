package client

import (
	"context"

	goniodv1 "goniod/proto/goniod/v1"
)

// Conversion is one crystal angle with its Bragg wavelength and photon energy.
type Conversion struct {
	ThetaDeg     float64 `json:"theta_deg"`
	WavelengthNM float64 `json:"wavelength_nm"`
	EnergyKeV    float64 `json:"energy_kev"`
}

// Conversions are the results of a conversion and the crystal spacing and order used.
type Conversions struct {
	CrystalDNM float64      `json:"crystal_d_nm"`
	Order      int          `json:"order"`
	Points     []Conversion `json:"conversions"`
}

// ConvertOptions name the crystal (by name, e.g. "LiF", or by spacing d in nm), the diffraction order (0: first)
// and a zero offset subtracted from each angle.
type ConvertOptions struct {
	Crystal        string
	CrystalDNM     float64
	Order          int
	ThetaOffsetDeg float64
}

func (o ConvertOptions) request() *goniodv1.ConvertRequest {
	return &goniodv1.ConvertRequest{Crystal: o.Crystal, CrystalDNm: o.CrystalDNM, Order: uint32(max(o.Order, 0)),
		ThetaOffsetDeg: o.ThetaOffsetDeg}
}

// ConvertAngles converts crystal angles (degrees) to wavelengths and energies by Bragg's law and E = hc/λ.
func (c *Client) ConvertAngles(ctx context.Context, thetaDeg []float64, o ConvertOptions) (Conversions, error) {
	req := o.request()
	req.ThetaDeg = thetaDeg
	return c.convert(ctx, req)
}

// ConvertWavelengths converts wavelengths (nm) to the crystal angles that reflect them.
func (c *Client) ConvertWavelengths(ctx context.Context, wavelengthNM []float64, o ConvertOptions) (Conversions, error) {
	req := o.request()
	req.WavelengthNm = wavelengthNM
	return c.convert(ctx, req)
}

func (c *Client) convert(ctx context.Context, req *goniodv1.ConvertRequest) (Conversions, error) {
	r, err := unary(ctx, c, true, func(ctx context.Context) (*goniodv1.ConvertResponse, error) {
		return c.analysis.Convert(ctx, req)
	})
	if err != nil {
		return Conversions{}, err
	}
	out := Conversions{CrystalDNM: r.GetCrystalDNm(), Order: int(r.GetOrder())}
	for _, p := range r.GetConversions() {
		out.Points = append(out.Points, Conversion{ThetaDeg: p.GetThetaDeg(), WavelengthNM: p.GetWavelengthNm(), EnergyKeV: p.GetEnergyKev()})
	}
	return out, nil
}
