package client

import (
	"bufio"
	"context"
	"fmt"
	"io"

	goniodv1 "goniod/proto/goniod/v1"
)

// Format of fetched points.
type Format string

// Point formats: CSV with a header row (the same columns as the daemon's points file), or JSON, one object per
// point and line, with the CSV column names as keys.
const (
	CSV  Format = "csv"
	JSON Format = "json"
)

// Fetch writes a scan's stored points to w in the given format and returns how many it wrote. It streams: a
// scan of any length is written without holding it in memory.
func (c *Client) Fetch(ctx context.Context, id string, f Format, w io.Writer) (int, error) {
	if f != CSV && f != JSON {
		return 0, fmt.Errorf("format %q: use csv or json", f)
	}
	s, err := c.Scan(ctx, id)
	if err != nil {
		return 0, err
	}
	var extra []string
	if len(s.Info.Channels) > 1 {
		extra = s.Info.Channels[1:]
	}
	table := goniodv1.NewPointTable(s.Info.Axes, extra)
	ctx, cancel := context.WithCancel(ctx)
	defer cancel()
	st, err := c.scans.ReadPoints(ctx, &goniodv1.ReadPointsRequest{Id: id})
	if err != nil {
		return 0, mapError(err)
	}
	bw := bufio.NewWriterSize(w, 1<<16)
	if f == CSV {
		if _, err := bw.WriteString(table.Header()); err != nil {
			return 0, err
		}
	}
	var buf []byte
	n := 0
	for {
		p, err := st.Recv()
		if err == io.EOF {
			break
		}
		if err != nil {
			return n, mapError(err)
		}
		buf = buf[:0]
		if f == CSV {
			buf = table.AppendCSV(buf, p)
		} else {
			buf = table.AppendJSON(buf, p)
		}
		if _, err := bw.Write(buf); err != nil {
			return n, err
		}
		n++
	}
	return n, bw.Flush()
}

// PointTable returns the column layout of a scan's points (for writing points received from Watch).
func PointTable(s Scan) *goniodv1.PointTable {
	var extra []string
	if len(s.Info.Channels) > 1 {
		extra = s.Info.Channels[1:]
	}
	return goniodv1.NewPointTable(s.Info.Axes, extra)
}

// Proto returns the point as the protocol message (for PointTable); nil for points not from the daemon.
func (p Point) Proto() *goniodv1.Point { return p.proto }
