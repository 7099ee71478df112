package goniodv1

import (
	"errors"
	"math"
	"strconv"
	"strings"
	"testing"
	"time"

	"google.golang.org/protobuf/proto"
	"google.golang.org/protobuf/types/known/timestamppb"
)

func float(v float64) *float64 { return &v }

// readings makes one axis reading per name, set and read-back apart by a motor step.
func readings(names ...string) []*AxisReading {
	var out []*AxisReading
	for i, n := range names {
		set := 10 + 0.0045*float64(i+1)
		out = append(out, &AxisReading{Name: n, SetDeg: set, ActualDeg: set + 0.001})
	}
	return out
}

// Every point written as a CSV line decodes to the same point, whatever its number of axes and channels.
func TestDecodeCSVRoundTrip(t *testing.T) {
	at := timestamppb.New(time.Date(2026, 12, 2, 3, 4, 5, 123456789, time.UTC))
	cases := []struct {
		name     string
		axes     []string
		channels []string
		p        *Point
	}{
		{"two axes, wavelength", []string{"theta", "twotheta"}, nil, &Point{Index: 7, Time: at, Axes: readings("theta", "twotheta"),
			DwellS: 1, Counts: 1334, RateCps: 1334, RateErrCps: 36.52, CorrectedRateCps: 1515.3, CorrectedRateErrCps: 47.1,
			TubeKv: 30, TubeMa: 0.8, WavelengthNm: float(0.154), EnergyKev: float(8.04)}},
		{"one axis, no wavelength", []string{"twotheta"}, nil, &Point{Index: 0, Time: at, Axes: readings("twotheta"),
			DwellS: 0.5, Counts: 3, RateCps: 6, RateErrCps: 3.46}},
		{"three axes, extra channel, infinite corrected rate", []string{"theta", "twotheta", "chi"}, []string{"monitor"},
			&Point{Index: 4294967295, Time: at, Axes: readings("theta", "twotheta", "chi"), DwellS: 2, Counts: 1 << 40,
				RateCps: 5e11, CorrectedRateCps: math.Inf(1), CorrectedRateErrCps: math.Inf(1),
				Channels: []*ChannelReading{{Name: "monitor", Counts: 99}}}},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			table := NewPointTable(tc.axes, tc.channels)
			got, err := table.DecodeCSV(table.AppendCSV(nil, tc.p))
			if err != nil {
				t.Fatal(err)
			}
			if !proto.Equal(got, tc.p) {
				t.Fatalf("decoded %v\nwant    %v", got, tc.p)
			}
		})
	}
}

// A bad line is refused with ErrBadLine and the column at fault.
func TestDecodeCSVErrors(t *testing.T) {
	table := NewPointTable([]string{"theta", "twotheta"}, []string{"monitor"})
	good := "3,2026-12-02T03:04:05Z,10.1,20.2,10,20,1,5,5,2.2,5,2.2,30,0.8,,,7"
	if _, err := table.DecodeCSV([]byte(good + "\r\n")); err != nil {
		t.Fatalf("the good line: %v", err)
	}
	field := func(i int, v string) string {
		f := strings.Split(good, ",")
		f[i] = v
		return strings.Join(f, ",")
	}
	cases := []struct{ line, want string }{
		{"", "1 fields, want 17"},
		{good + ",1", "18 fields, want 17"},
		{field(0, "-1"), "column index"},
		{field(0, "4294967296"), "column index"},
		{field(1, "2026-12-02 03:04:05"), "column time"},
		{field(2, "ten"), "column theta_deg"},
		{field(5, ""), "column twotheta_set_deg"},
		{field(7, "5.5"), "column counts"},
		{field(13, "0.8mA"), "column tube_ma"},
		{field(15, "x"), "column energy_kev"},
		{field(16, "-7"), "column monitor_counts"},
	}
	for _, tc := range cases {
		_, err := table.DecodeCSV([]byte(tc.line))
		if !errors.Is(err, ErrBadLine) || !strings.Contains(err.Error(), tc.want) {
			t.Errorf("DecodeCSV(%q) = %v, want ErrBadLine with %q", tc.line, err, tc.want)
		}
	}
}

// BenchmarkDecodeCSV decodes one stored line of a two-axis scan: every replay, fetch and analysis of a stored
// scan decodes each of its lines.
func BenchmarkDecodeCSV(b *testing.B) {
	table := NewPointTable([]string{"theta", "twotheta"}, nil)
	at := timestamppb.New(time.Date(2026, 12, 2, 3, 4, 5, 123456789, time.UTC))
	line := table.AppendCSV(nil, &Point{Index: 1234, Time: at, Axes: readings("theta", "twotheta"), DwellS: 1,
		Counts: 1334, RateCps: 1334, RateErrCps: 36.52388261, CorrectedRateCps: 1515.3027, CorrectedRateErrCps: 47.11,
		TubeKv: 30, TubeMa: 0.8, WavelengthNm: float(0.15405929), EnergyKev: float(8.0478227)})
	b.ReportAllocs()
	for b.Loop() {
		if _, err := table.DecodeCSV(line); err != nil {
			b.Fatal(err)
		}
	}
}

// parseFloat must give strconv.ParseFloat's answer bit for bit, and fail where it fails.
func checkParseFloat(t *testing.T, s string) {
	t.Helper()
	got, gotErr := parseFloat([]byte(s))
	want, wantErr := strconv.ParseFloat(s, 64)
	if (gotErr == nil) != (wantErr == nil) || math.Float64bits(got) != math.Float64bits(want) {
		t.Fatalf("parseFloat(%q) = %v (%x), %v; strconv: %v (%x), %v", s, got, math.Float64bits(got), gotErr, want, math.Float64bits(want), wantErr)
	}
}

func TestParseFloatMatchesStrconv(t *testing.T) {
	for _, s := range []string{
		"0", "-0", "0.0", "-0.0", "22.5", "45", "0.001", "1414.213562373095", "0.1540798303731561", "8.046750709222021",
		"31.105600000000003", "9007199254740991", "9007199254740993", "900719925474099.2", "0.1", "0.3", "-0.0045",
		"1e-05", "1.5e+06", "NaN", "+Inf", "-Inf", "", "-", ".", "1.", ".5", "-.5", "+1", "1_0", "0x1p-2", "1.2.3",
		"0.0000000000000000000001", "0.00000000000000000000001", "123456789012345678901234567890", "1,5", " 1", "١",
	} {
		checkParseFloat(t, s)
	}
}

// FuzzParseFloat compares parseFloat with strconv.ParseFloat on any text (seeds in testdata/fuzz).
func FuzzParseFloat(f *testing.F) {
	f.Fuzz(func(t *testing.T, s string) { checkParseFloat(t, s) })
}

// referenceDecode is the plain reading of a points line (split, then strconv and time.Parse per column) that
// DecodeCSV must match, value for value; it only says whether a line is bad, not why.
func referenceDecode(t *PointTable, line string) (*Point, bool) {
	f := strings.Split(strings.TrimRight(line, "\r\n"), ",")
	if len(f) != len(t.cols) {
		return nil, false
	}
	ok := true
	num := func(s string) float64 {
		v, err := strconv.ParseFloat(s, 64)
		ok = ok && err == nil
		return v
	}
	count := func(s string, bits int) uint64 {
		v, err := strconv.ParseUint(s, 10, bits)
		ok = ok && err == nil
		return v
	}
	ts, err := time.Parse(time.RFC3339Nano, f[1])
	ok = ok && err == nil
	p := &Point{Index: uint32(count(f[0], 32)), Time: timestamppb.New(ts)}
	n := len(t.Axes)
	for i, a := range t.Axes {
		p.Axes = append(p.Axes, &AxisReading{Name: a, ActualDeg: num(f[2+i]), SetDeg: num(f[2+n+i])})
	}
	k := 2 + 2*n
	p.DwellS, p.Counts, p.RateCps, p.RateErrCps = num(f[k]), count(f[k+1], 64), num(f[k+2]), num(f[k+3])
	p.CorrectedRateCps, p.CorrectedRateErrCps, p.TubeKv, p.TubeMa = num(f[k+4]), num(f[k+5]), num(f[k+6]), num(f[k+7])
	if f[k+8] != "" {
		p.WavelengthNm = float(num(f[k+8]))
	}
	if f[k+9] != "" {
		p.EnergyKev = float(num(f[k+9]))
	}
	for i, c := range t.Channels {
		p.Channels = append(p.Channels, &ChannelReading{Name: c, Counts: count(f[k+10+i], 64)})
	}
	return p, ok
}

// FuzzDecodeCSV compares DecodeCSV with the plain reading on any line (seeds in testdata/fuzz).
func FuzzDecodeCSV(f *testing.F) {
	table := NewPointTable([]string{"theta", "twotheta"}, []string{"monitor"})
	f.Fuzz(func(t *testing.T, line string) {
		got, err := table.DecodeCSV([]byte(line))
		want, ok := referenceDecode(table, line)
		if (err == nil) != ok {
			t.Fatalf("DecodeCSV(%q): error %v, the plain reading ok=%v", line, err, ok)
		}
		if ok && !proto.Equal(got, want) {
			t.Fatalf("DecodeCSV(%q) = %v, the plain reading %v", line, got, want)
		}
	})
}
