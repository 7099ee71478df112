package client

import (
	"bufio"
	"context"
	"fmt"
	"io"
	"strconv"
	"strings"
)

// SeriesIDPrefix starts every series ID (scan IDs start with "scan-").
const SeriesIDPrefix = "series-"

// FetchSeries writes the stored points of every scan of a series to w, scan after scan in the series' order,
// as one table with a leading scan_id column: CSV with one header row (scan_id, then a scan's columns), or JSON
// lines with a "scan_id" key first in every object. The tube_kv and tube_ma columns tell the settings apart.
// It returns how many points it wrote.
func (c *Client) FetchSeries(ctx context.Context, id string, f Format, w io.Writer) (int, error) {
	if f != CSV && f != JSON {
		return 0, fmt.Errorf("format %q: use csv or json", f)
	}
	s, err := c.Series(ctx, id)
	if err != nil {
		return 0, err
	}
	ctx, cancel := context.WithCancel(ctx) // ends the point streams when a write fails
	defer cancel()
	bw := bufio.NewWriterSize(w, 1<<16)
	n, header := 0, ""
	var buf []byte
	for _, sid := range s.ScanIDs {
		sc, err := c.Scan(ctx, sid)
		if err != nil {
			return n, fmt.Errorf("scan %s of series %s: %w", sid, id, err)
		}
		table := PointTable(sc)
		switch {
		case header == "":
			header = table.Header()
			if f == CSV {
				if _, err := bw.WriteString("scan_id," + header); err != nil {
					return n, err
				}
			}
		case table.Header() != header:
			return n, fmt.Errorf("scan %s of series %s has columns %q, unlike the series' first scan %q",
				sid, id, strings.TrimSpace(table.Header()), strings.TrimSpace(header))
		}
		st, err := c.Points(ctx, sid, 0, 0)
		if err != nil {
			return n, err
		}
		for p := range st.C {
			buf = buf[:0]
			if f == CSV {
				buf = append(append(buf, sid...), ',')
				buf = table.AppendCSV(buf, p.Proto())
			} else {
				buf = append(buf, `{"scan_id":`...)
				buf = strconv.AppendQuote(buf, sid)
				buf = append(buf, ',')
				buf = append(buf, table.AppendJSON(nil, p.Proto())[1:]...)
			}
			if _, err := bw.Write(buf); err != nil {
				return n, err
			}
			n++
		}
		if err := st.Err(); err != nil {
			return n, err
		}
	}
	return n, bw.Flush()
}
