package goniodv1

// This file is written by hand: the table form of a Point (CSV columns and the matching JSON keys), shared by
// the daemon's store and the client so that a stored points file and a fetched one have the same columns.

import (
	"bytes"
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

// DecodeCSV parses one CSV line (without or with its newline) into a point. It reads the fields in place and
// puts the point with its time, axis readings and optional values in one allocation: reading a stored scan
// (a replay, a fetch, an analysis) decodes every line.
func (t *PointTable) DecodeCSV(line []byte) (*Point, error) {
	line = bytes.TrimRight(line, "\r\n")
	if n := bytes.Count(line, []byte{','}) + 1; n != len(t.cols) {
		return nil, fmt.Errorf("%w: %d fields, want %d", ErrBadLine, n, len(t.cols))
	}
	f := fields{line: line, cols: t.cols}
	b := newPointBlock(len(t.Axes))
	p := &b.p
	idx, err := strconv.ParseUint(string(f.next()), 10, 32)
	if err != nil {
		return nil, fmt.Errorf("%w: column index: %v", ErrBadLine, err)
	}
	p.Index = uint32(idx)
	ts, err := time.Parse(time.RFC3339Nano, string(f.next()))
	if err != nil {
		return nil, fmt.Errorf("%w: column time: %v", ErrBadLine, err)
	}
	b.time.Seconds, b.time.Nanos = ts.Unix(), int32(ts.Nanosecond())
	p.Time = &b.time
	for i, a := range t.Axes {
		p.Axes[i].Name = a
		if p.Axes[i].ActualDeg, err = f.float(); err != nil {
			return nil, err
		}
	}
	for i := range t.Axes {
		if p.Axes[i].SetDeg, err = f.float(); err != nil {
			return nil, err
		}
	}
	if p.DwellS, err = f.float(); err != nil {
		return nil, err
	}
	if p.Counts, err = f.count(); err != nil {
		return nil, err
	}
	for _, d := range []*float64{&p.RateCps, &p.RateErrCps, &p.CorrectedRateCps, &p.CorrectedRateErrCps, &p.TubeKv, &p.TubeMa} {
		if *d, err = f.float(); err != nil {
			return nil, err
		}
	}
	for i, opt := range []**float64{&p.WavelengthNm, &p.EnergyKev} {
		if f.peek() == 0 {
			f.next()
			continue
		}
		if b.optional[i], err = f.float(); err != nil {
			return nil, err
		}
		*opt = &b.optional[i]
	}
	for _, c := range t.Channels {
		v, err := f.count()
		if err != nil {
			return nil, err
		}
		p.Channels = append(p.Channels, &ChannelReading{Name: c, Counts: v})
	}
	return p, nil
}

// pointBlock holds a decoded point and the messages it points to, allocated together. The point keeps the
// whole block alive, as it would keep its parts.
type pointBlock struct {
	p        Point
	time     timestamppb.Timestamp
	optional [2]float64 // wavelength, energy
	axes     [2]*AxisReading
	readings [2]AxisReading // the common two axes; more are allocated apart
}

func newPointBlock(axes int) *pointBlock {
	b := &pointBlock{}
	if axes <= len(b.readings) {
		b.p.Axes = b.axes[:axes]
		for i := range axes {
			b.p.Axes[i] = &b.readings[i]
		}
		return b
	}
	b.p.Axes = make([]*AxisReading, axes)
	for i := range b.p.Axes {
		b.p.Axes[i] = &AxisReading{}
	}
	return b
}

// fields reads the comma-separated fields of a line in order; the caller has checked their number.
type fields struct {
	line []byte
	cols []string
	col  int // index of the next field
}

// next returns the next field.
func (f *fields) next() []byte {
	field := f.line
	if i := bytes.IndexByte(f.line, ','); i >= 0 {
		field, f.line = f.line[:i], f.line[i+1:]
	} else {
		f.line = nil
	}
	f.col++
	return field
}

// skip passes over the next field, which is n bytes long.
func (f *fields) skip(n int) {
	if n < len(f.line) {
		n++ // and its comma
	}
	f.line = f.line[n:]
	f.col++
}

// peek returns the length of the next field.
func (f *fields) peek() int {
	if i := bytes.IndexByte(f.line, ','); i >= 0 {
		return i
	}
	return len(f.line)
}

func (f *fields) float() (float64, error) {
	if v, n, ok := scanDecimal(f.line); ok {
		f.skip(n)
		return v, nil
	}
	v, err := strconv.ParseFloat(string(f.next()), 64)
	if err != nil {
		return 0, fmt.Errorf("%w: column %s: %v", ErrBadLine, f.cols[f.col-1], err)
	}
	return v, nil
}

func (f *fields) count() (uint64, error) {
	v, err := strconv.ParseUint(string(f.next()), 10, 64)
	if err != nil {
		return 0, fmt.Errorf("%w: column %s: %v", ErrBadLine, f.cols[f.col-1], err)
	}
	return v, nil
}

// parseFloat is strconv.ParseFloat(string(b), 64), bit for bit, with a shortcut for plain decimals (see
// scanDecimal).
func parseFloat(b []byte) (float64, error) {
	if v, n, ok := scanDecimal(b); ok && n == len(b) {
		return v, nil
	}
	return strconv.ParseFloat(string(b), 64)
}

// scanDecimal reads a plain decimal ("22.5", "-0.0045", "1414.213562373095") from the start of b up to a
// comma or the end, and returns its value and length. When the digits make an integer m < 2^53 and k ≤ 22 of
// them follow the point, m and 10^k are exact doubles and one division rounds correctly, as
// strconv.ParseFloat does (Clinger, "How to read floating point numbers accurately", PLDI 1990). ok is false
// for anything else, which strconv then reads.
func scanDecimal(b []byte) (v float64, n int, ok bool) {
	neg := len(b) > 0 && b[0] == '-'
	if neg {
		n = 1
	}
	start := n
	var m uint64
	frac, point := 0, false
	for ; n < len(b) && b[n] != ','; n++ {
		switch c := b[n]; {
		case c >= '0' && c <= '9' && m < 1<<53/10:
			m = m*10 + uint64(c-'0')
			if point {
				frac++
			}
		case c == '.' && !point && n > start:
			point = true
		default:
			return 0, n, false
		}
	}
	if n == start || b[n-1] == '.' || frac > 22 {
		return 0, n, false
	}
	v = float64(m) / pow10[frac]
	if neg {
		v = -v
	}
	return v, n, true
}

// pow10 are the powers of ten that a double holds exactly.
var pow10 = [...]float64{1e0, 1e1, 1e2, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8, 1e9, 1e10, 1e11, 1e12, 1e13, 1e14, 1e15, 1e16,
	1e17, 1e18, 1e19, 1e20, 1e21, 1e22}
