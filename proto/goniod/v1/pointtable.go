package goniodv1

// This file is written by hand: the table form of a Point (CSV columns and the matching JSON keys), shared by
// the daemon's store and the client so that a stored points file and a fetched one have the same columns.

import (
	"errors"
	"fmt"
	"math"
	"strconv"
	"strings"
	"time"

	"google.golang.org/protobuf/types/known/timestamppb"
)

// Fixed columns around the per-axis ones. Their names are part of goniod's stable interface.
var (
	leadColumns = []string{"index", "time"}
	tailColumns = []string{"dwell_s", "counts", "rate_cps", "rate_err_cps", "corrected_rate_cps",
		"corrected_rate_err_cps", "tube_kv", "tube_ma", "wavelength_nm", "energy_kev"}
)

// PointTable is the column layout of the points of one scan: the fixed columns, two per axis
// (<axis>_deg read-back, <axis>_set_deg requested) and one per extra counter channel (<channel>_counts).
type PointTable struct {
	Axes     []string
	Channels []string // extra channels after the primary detector
	cols     []string
}

// NewPointTable returns the layout for a scan's axes and extra channels.
func NewPointTable(axes, extraChannels []string) *PointTable {
	t := &PointTable{Axes: axes, Channels: extraChannels}
	t.cols = append(t.cols, leadColumns...)
	for _, a := range axes {
		t.cols = append(t.cols, a+"_deg")
	}
	for _, a := range axes {
		t.cols = append(t.cols, a+"_set_deg")
	}
	t.cols = append(t.cols, tailColumns...)
	for _, c := range extraChannels {
		t.cols = append(t.cols, c+"_counts")
	}
	return t
}

// ParsePointTable reads a layout back from a CSV header line.
func ParsePointTable(header string) (*PointTable, error) {
	cols := strings.Split(strings.TrimRight(header, "\r\n"), ",")
	if len(cols) < len(leadColumns)+len(tailColumns) {
		return nil, fmt.Errorf("points header has %d columns, fewer than %d", len(cols), len(leadColumns)+len(tailColumns))
	}
	for i, c := range leadColumns {
		if cols[i] != c {
			return nil, fmt.Errorf("points header column %d is %q, want %q", i+1, cols[i], c)
		}
	}
	rest := cols[len(leadColumns):]
	var axes []string
	for len(rest) > 0 && strings.HasSuffix(rest[0], "_deg") && !strings.HasSuffix(rest[0], "_set_deg") {
		axes = append(axes, strings.TrimSuffix(rest[0], "_deg"))
		rest = rest[1:]
	}
	for _, a := range axes {
		if len(rest) == 0 || rest[0] != a+"_set_deg" {
			return nil, fmt.Errorf("points header lacks %s_set_deg", a)
		}
		rest = rest[1:]
	}
	for _, c := range tailColumns {
		if len(rest) == 0 || rest[0] != c {
			return nil, fmt.Errorf("points header lacks %s", c)
		}
		rest = rest[1:]
	}
	var extra []string
	for _, c := range rest {
		if !strings.HasSuffix(c, "_counts") {
			return nil, fmt.Errorf("points header has unknown column %q", c)
		}
		extra = append(extra, strings.TrimSuffix(c, "_counts"))
	}
	t := NewPointTable(axes, extra)
	return t, nil
}

// Columns are the column names in order.
func (t *PointTable) Columns() []string { return t.cols }

// Header is the CSV header line with its newline.
func (t *PointTable) Header() string { return strings.Join(t.cols, ",") + "\n" }

func appendFloat(dst []byte, v float64) []byte { return strconv.AppendFloat(dst, v, 'g', -1, 64) }

// axisReading finds the point's reading of an axis.
func axisReading(p *Point, name string, i int) *AxisReading {
	if i < len(p.Axes) && p.Axes[i].GetName() == name {
		return p.Axes[i]
	}
	for _, a := range p.Axes {
		if a.GetName() == name {
			return a
		}
	}
	return &AxisReading{Name: name, SetDeg: math.NaN(), ActualDeg: math.NaN()}
}

// cell is one value of a point's row: a float, an unsigned integer or text (empty text: missing value).
type cell struct {
	kind byte // 'f', 'u' or 't'
	num  float64
	n    uint64
	text string
}

func (c cell) appendCSV(dst []byte) []byte {
	switch c.kind {
	case 'u':
		return strconv.AppendUint(dst, c.n, 10)
	case 't':
		return append(dst, c.text...)
	}
	return appendFloat(dst, c.num)
}

func (c cell) appendJSON(dst []byte) []byte {
	switch {
	case c.kind == 'u':
		return strconv.AppendUint(dst, c.n, 10)
	case c.kind == 't' && c.text == "":
		return append(dst, "null"...)
	case c.kind == 't':
		return strconv.AppendQuote(dst, c.text)
	case math.IsNaN(c.num) || math.IsInf(c.num, 0):
		return append(dst, "null"...)
	}
	return appendFloat(dst, c.num)
}

// values calls emit for every column in order with its value.
func (t *PointTable) values(p *Point, emit func(col string, c cell)) {
	f := func(col string, v float64) { emit(col, cell{kind: 'f', num: v}) }
	emit("index", cell{kind: 'u', n: uint64(p.Index)})
	emit("time", cell{kind: 't', text: p.GetTime().AsTime().UTC().Format(time.RFC3339Nano)})
	for i, a := range t.Axes {
		f(a+"_deg", axisReading(p, a, i).ActualDeg)
	}
	for i, a := range t.Axes {
		f(a+"_set_deg", axisReading(p, a, i).SetDeg)
	}
	f("dwell_s", p.DwellS)
	emit("counts", cell{kind: 'u', n: p.Counts})
	f("rate_cps", p.RateCps)
	f("rate_err_cps", p.RateErrCps)
	f("corrected_rate_cps", p.CorrectedRateCps)
	f("corrected_rate_err_cps", p.CorrectedRateErrCps)
	f("tube_kv", p.TubeKv)
	f("tube_ma", p.TubeMa)
	for _, o := range []struct {
		col string
		v   *float64
	}{{"wavelength_nm", p.WavelengthNm}, {"energy_kev", p.EnergyKev}} {
		if o.v != nil {
			f(o.col, *o.v)
		} else {
			emit(o.col, cell{kind: 't'})
		}
	}
	for _, c := range t.Channels {
		var n uint64
		for _, ch := range p.Channels {
			if ch.GetName() == c {
				n = ch.GetCounts()
			}
		}
		emit(c+"_counts", cell{kind: 'u', n: n})
	}
}

// AppendCSV appends the point as one CSV line with its newline.
func (t *PointTable) AppendCSV(dst []byte, p *Point) []byte {
	first := true
	t.values(p, func(_ string, c cell) {
		if !first {
			dst = append(dst, ',')
		}
		first = false
		dst = c.appendCSV(dst)
	})
	return append(dst, '\n')
}

// AppendJSON appends the point as one JSON object with the CSV column names as keys, and a newline.
// Missing values (no wavelength) are null.
func (t *PointTable) AppendJSON(dst []byte, p *Point) []byte {
	dst = append(dst, '{')
	first := true
	t.values(p, func(col string, c cell) {
		if !first {
			dst = append(dst, ',')
		}
		first = false
		dst = strconv.AppendQuote(dst, col)
		dst = append(dst, ':')
		dst = c.appendJSON(dst)
	})
	return append(dst, '}', '\n')
}

// ErrBadLine marks a points line that cannot be read: torn by a crash or damaged.
var ErrBadLine = errors.New("bad points line")

// DecodeCSV parses one CSV line (without or with its newline) into a point.
func (t *PointTable) DecodeCSV(line []byte) (*Point, error) {
	s := strings.TrimRight(string(line), "\r\n")
	f := strings.Split(s, ",")
	if len(f) != len(t.cols) {
		return nil, fmt.Errorf("%w: %d fields, want %d", ErrBadLine, len(f), len(t.cols))
	}
	num := func(i int) (float64, error) {
		v, err := strconv.ParseFloat(f[i], 64)
		if err != nil {
			return 0, fmt.Errorf("%w: column %s: %v", ErrBadLine, t.cols[i], err)
		}
		return v, nil
	}
	count := func(i int) (uint64, error) {
		v, err := strconv.ParseUint(f[i], 10, 64)
		if err != nil {
			return 0, fmt.Errorf("%w: column %s: %v", ErrBadLine, t.cols[i], err)
		}
		return v, nil
	}
	p := &Point{}
	idx, err := strconv.ParseUint(f[0], 10, 32)
	if err != nil {
		return nil, fmt.Errorf("%w: column index: %v", ErrBadLine, err)
	}
	p.Index = uint32(idx)
	ts, err := time.Parse(time.RFC3339Nano, f[1])
	if err != nil {
		return nil, fmt.Errorf("%w: column time: %v", ErrBadLine, err)
	}
	p.Time = timestamppb.New(ts)
	k := 2
	n := len(t.Axes)
	p.Axes = make([]*AxisReading, n)
	for i, a := range t.Axes {
		act, err := num(k + i)
		if err != nil {
			return nil, err
		}
		set, err := num(k + n + i)
		if err != nil {
			return nil, err
		}
		p.Axes[i] = &AxisReading{Name: a, ActualDeg: act, SetDeg: set}
	}
	k += 2 * n
	dst := []*float64{&p.DwellS, nil, &p.RateCps, &p.RateErrCps, &p.CorrectedRateCps, &p.CorrectedRateErrCps, &p.TubeKv, &p.TubeMa}
	for i, d := range dst {
		if d == nil {
			if p.Counts, err = count(k + i); err != nil {
				return nil, err
			}
			continue
		}
		if *d, err = num(k + i); err != nil {
			return nil, err
		}
	}
	k += len(dst)
	for _, opt := range []**float64{&p.WavelengthNm, &p.EnergyKev} {
		if f[k] != "" {
			v, err := num(k)
			if err != nil {
				return nil, err
			}
			*opt = &v
		}
		k++
	}
	for i, c := range t.Channels {
		v, err := count(k + i)
		if err != nil {
			return nil, err
		}
		p.Channels = append(p.Channels, &ChannelReading{Name: c, Counts: v})
	}
	return p, nil
}
