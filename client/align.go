package client

import (
	"context"
	"time"

	"google.golang.org/protobuf/types/known/durationpb"

	goniodv1 "goniod/proto/goniod/v1"
)

// AlignOptions steer the alignment routine; zero values take the daemon's defaults.
type AlignOptions struct {
	// Dwell per point of the fine scans (default 1 s).
	Dwell time.Duration
	// Store the offsets in the instrument configuration (kept across restarts).
	Store bool
	// Source for the alignment (nil: the present setting); high voltage is on for it and off after.
	Source *Source
	// SearchDeg is the half-width of the coarse search around each axis's present zero (default 1°).
	SearchDeg float64
	// Order of the crystal's reference reflection (0: the daemon chooses).
	Order int
}

// AxisOffset is the zero offset found for one axis, with its standard error and the offset used before.
type AxisOffset struct {
	Axis              string
	OffsetDeg, ErrDeg float64
	PreviousDeg       float64
}

// Alignment is the result of the alignment routine.
type Alignment struct {
	Offsets []AxisOffset
	Stored  bool
	// ScanIDs are the scans the routine ran (stored like any scan).
	ScanIDs []string
	// Reference is the reflection the crystal axis was aligned on.
	Reference string
}

// Align runs the alignment routine and waits for it. It takes as long as its scans (minutes on a real
// instrument): the client's timeout does not apply, ctx bounds it; cancelling ctx stops it.
func (c *Client) Align(ctx context.Context, o AlignOptions) (Alignment, error) {
	req := &goniodv1.AlignRequest{Store: o.Store, SearchDeg: o.SearchDeg, Order: uint32(o.Order)}
	if o.Dwell != 0 {
		req.Dwell = durationpb.New(o.Dwell)
	}
	if o.Source != nil {
		req.Source = &goniodv1.Source{Kv: o.Source.KV, Ma: o.Source.MA}
	}
	p, err := c.instrument.Align(ctx, req)
	if err != nil {
		return Alignment{}, mapError(err)
	}
	out := Alignment{Stored: p.GetStored(), ScanIDs: p.GetScanIds(), Reference: p.GetReference()}
	for _, a := range p.GetOffsets() {
		out.Offsets = append(out.Offsets, AxisOffset{Axis: a.GetAxis(), OffsetDeg: a.GetOffsetDeg(),
			ErrDeg: a.GetOffsetErrDeg(), PreviousDeg: a.GetPreviousOffsetDeg()})
	}
	return out, nil
}
