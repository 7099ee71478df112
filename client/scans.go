package client

import (
	"context"
	"io"

	goniodv1 "goniod/proto/goniod/v1"
)

// Submit queues one scan.
func (c *Client) Submit(ctx context.Context, r ScanRequest) (Scan, error) {
	p, err := unary(ctx, c, false, func(ctx context.Context) (*goniodv1.Scan, error) {
		return c.scans.SubmitScan(ctx, &goniodv1.SubmitScanRequest{Scan: r.proto()})
	})
	if err != nil {
		return Scan{}, err
	}
	return scanFromProto(p), nil
}

// SubmitSeries queues a series: one scan per source setting.
func (c *Client) SubmitSeries(ctx context.Context, r SeriesRequest) (Series, error) {
	req := &goniodv1.SeriesRequest{Scan: r.Scan.proto(), Settle: dur(r.Settle), KeepHighVoltage: r.KeepHighVoltage}
	for _, s := range r.Sources {
		req.Sources = append(req.Sources, &goniodv1.Source{Kv: s.KV, Ma: s.MA})
	}
	p, err := unary(ctx, c, false, func(ctx context.Context) (*goniodv1.Series, error) {
		return c.scans.SubmitSeries(ctx, &goniodv1.SubmitSeriesRequest{Series: req})
	})
	if err != nil {
		return Series{}, err
	}
	return Series{ID: p.GetId(), ScanIDs: p.GetScanIds()}, nil
}

// Scan returns a scan's record.
func (c *Client) Scan(ctx context.Context, id string) (Scan, error) {
	p, err := unary(ctx, c, true, func(ctx context.Context) (*goniodv1.Scan, error) {
		return c.scans.GetScan(ctx, &goniodv1.GetScanRequest{Id: id})
	})
	if err != nil {
		return Scan{}, err
	}
	return scanFromProto(p), nil
}

// Series returns a series.
func (c *Client) Series(ctx context.Context, id string) (Series, error) {
	p, err := unary(ctx, c, true, func(ctx context.Context) (*goniodv1.Series, error) {
		return c.scans.GetSeries(ctx, &goniodv1.GetSeriesRequest{Id: id})
	})
	if err != nil {
		return Series{}, err
	}
	return Series{ID: p.GetId(), ScanIDs: p.GetScanIds()}, nil
}

// ListOptions select a page of scans.
type ListOptions struct {
	PageSize  int
	PageToken string
	States    []State
}

// List returns one page of scans, newest first, and the token of the next page ("" at the end).
func (c *Client) List(ctx context.Context, o ListOptions) ([]Scan, string, error) {
	req := &goniodv1.ListScansRequest{PageSize: uint32(o.PageSize), PageToken: o.PageToken}
	for _, s := range o.States {
		req.States = append(req.States, stateProto(s))
	}
	p, err := unary(ctx, c, true, func(ctx context.Context) (*goniodv1.ListScansResponse, error) {
		return c.scans.ListScans(ctx, req)
	})
	if err != nil {
		return nil, "", err
	}
	out := make([]Scan, len(p.GetScans()))
	for i, s := range p.GetScans() {
		out[i] = scanFromProto(s)
	}
	return out, p.GetNextPageToken(), nil
}

func (c *Client) scanOp(ctx context.Context, call func(context.Context, *goniodv1.ScanRef, ...grpcCallOption) (*goniodv1.Scan, error), id string) (Scan, error) {
	p, err := unary(ctx, c, false, func(ctx context.Context) (*goniodv1.Scan, error) {
		return call(ctx, &goniodv1.ScanRef{Id: id})
	})
	if err != nil {
		return Scan{}, err
	}
	return scanFromProto(p), nil
}

// Pause stops a running scan after its current point.
func (c *Client) Pause(ctx context.Context, id string) (Scan, error) {
	return c.scanOp(ctx, c.scans.PauseScan, id)
}

// Resume continues a paused or interrupted scan from its next point.
func (c *Client) Resume(ctx context.Context, id string) (Scan, error) {
	return c.scanOp(ctx, c.scans.ResumeScan, id)
}

// Cancel cancels a scan.
func (c *Client) Cancel(ctx context.Context, id string) (Scan, error) {
	return c.scanOp(ctx, c.scans.CancelScan, id)
}

// Release lets a held scan run.
func (c *Client) Release(ctx context.Context, id string) (Scan, error) {
	return c.scanOp(ctx, c.scans.ReleaseScan, id)
}

// Watch follows a scan: its record, every point from index from (stored ones first, then live ones), state
// changes, and a last event with End set when the scan is done, failed or cancelled.
func (c *Client) Watch(ctx context.Context, id string, from int) (*Stream[Event], error) {
	st, err := c.scans.WatchScan(ctx, &goniodv1.WatchScanRequest{Id: id, FromIndex: uint32(from)})
	if err != nil {
		return nil, mapError(err)
	}
	ended := false
	return stream(ctx, func() (Event, error) {
		if ended {
			return Event{}, io.EOF
		}
		ev, err := st.Recv()
		if err != nil {
			return Event{}, err
		}
		out := Event{End: ev.GetEnd()}
		ended = out.End
		switch e := ev.Event.(type) {
		case *goniodv1.ScanEvent_Point:
			p := pointFromProto(e.Point)
			out.Point = &p
		case *goniodv1.ScanEvent_State:
			s := scanFromProto(e.State)
			out.Scan = &s
		}
		return out, nil
	}), nil
}

// Points streams a scan's stored points from index from (limit 0: all).
func (c *Client) Points(ctx context.Context, id string, from, limit int) (*Stream[Point], error) {
	st, err := c.scans.ReadPoints(ctx, &goniodv1.ReadPointsRequest{Id: id, FromIndex: uint32(from), Limit: uint32(limit)})
	if err != nil {
		return nil, mapError(err)
	}
	return stream(ctx, func() (Point, error) {
		p, err := st.Recv()
		if err != nil {
			return Point{}, err
		}
		return pointFromProto(p), nil
	}), nil
}
