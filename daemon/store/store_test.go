package store

import (
	"context"
	"errors"
	"log/slog"
	"os"
	"strings"
	"testing"
	"time"

	"google.golang.org/protobuf/types/known/timestamppb"

	"goniod/daemon/scan"
	goniodv1 "goniod/proto/goniod/v1"
)

var discard = slog.New(slog.DiscardHandler)

func newStore(t *testing.T) *Store {
	t.Helper()
	s, err := Open(t.TempDir(), discard)
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { s.Close() })
	return s
}

var table = goniodv1.NewPointTable([]string{"theta", "twotheta"}, nil)

func point(i int) *goniodv1.Point {
	th := 10 + float64(i)*0.1
	return &goniodv1.Point{Index: uint32(i), Time: timestamppb.New(time.Unix(1700000000, int64(i))),
		Axes:   []*goniodv1.AxisReading{{Name: "theta", SetDeg: th, ActualDeg: th}, {Name: "twotheta", SetDeg: 2 * th, ActualDeg: 2 * th}},
		DwellS: 1, Counts: uint64(100 + i), RateCps: float64(100 + i), RateErrCps: 10, TubeKv: 30, TubeMa: 0.8}
}

func create(t testing.TB, s *Store, points int) string {
	t.Helper()
	rec := &scan.Record{ID: s.NewScanID(), State: scan.Queued, Created: time.Now()}
	if err := s.Create(rec, table.Header()); err != nil {
		t.Fatal(err)
	}
	app, _, err := s.OpenAppender(rec.ID)
	if err != nil {
		t.Fatal(err)
	}
	defer app.Close()
	for i := 0; i < points; i++ {
		if err := app.Append(point(i)); err != nil {
			t.Fatal(err)
		}
	}
	return rec.ID
}

func readIndexes(t *testing.T, s *Store, id string, from, limit int) []int {
	t.Helper()
	var got []int
	err := s.ReadPoints(context.Background(), id, from, limit, func(p *goniodv1.Point) error {
		got = append(got, int(p.Index))
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	return got
}

func TestAppendAndRead(t *testing.T) {
	s := newStore(t)
	id := create(t, s, 50)
	if got := readIndexes(t, s, id, 0, 0); len(got) != 50 || got[49] != 49 {
		t.Fatalf("read %d points", len(got))
	}
	if got := readIndexes(t, s, id, 45, 3); len(got) != 3 || got[0] != 45 || got[2] != 47 {
		t.Fatalf("page from 45 limit 3: %v", got)
	}
	if n, _ := s.CountPoints(id); n != 50 {
		t.Fatalf("count %d", n)
	}
}

// A crash mid-append leaves a line without its newline (or a damaged last line): it is cut off on the next
// open, every earlier point stays, and appending continues at the right index.
func TestTornLastLineIsDropped(t *testing.T) {
	for _, torn := range []string{"12,2026-12-02T01:00:00Z,11.", "12,garbage,1,2,3\n", "\x00\x00\x00\x00"} {
		s := newStore(t)
		id := create(t, s, 12)
		f, err := os.OpenFile(s.PointsPath(id), os.O_APPEND|os.O_WRONLY, 0)
		if err != nil {
			t.Fatal(err)
		}
		f.WriteString(torn)
		f.Close()
		if got := readIndexes(t, s, id, 0, 12); len(got) != 12 {
			t.Fatalf("reader with a torn tail %q: %d points", torn, len(got))
		}
		app, rec, err := s.OpenAppender(id)
		if err != nil {
			t.Fatalf("torn tail %q: %v", torn, err)
		}
		if rec.Points != 12 || rec.DroppedBytes != int64(len(torn)) {
			t.Errorf("torn tail %q: recovered %+v", torn, rec)
		}
		if err := app.Append(point(12)); err != nil {
			t.Fatal(err)
		}
		app.Close()
		if got := readIndexes(t, s, id, 0, 0); len(got) != 13 || got[12] != 12 {
			t.Errorf("after recovery and append: %v", got)
		}
	}
}

// Damage before the last line is not a torn write: the file is left alone and the error says so.
func TestDamagedMiddleLineIsAnError(t *testing.T) {
	s := newStore(t)
	id := create(t, s, 5)
	b, _ := os.ReadFile(s.PointsPath(id))
	lines := strings.SplitAfter(string(b), "\n")
	lines[2] = "garbage\n"
	os.WriteFile(s.PointsPath(id), []byte(strings.Join(lines, "")), 0o640)
	if _, _, err := s.OpenAppender(id); !errors.Is(err, ErrDamaged) || !strings.Contains(err.Error(), "not the last line") {
		t.Fatalf("got %v, want a refusal", err)
	}
	after, _ := os.ReadFile(s.PointsPath(id))
	if string(after) != strings.Join(lines, "") {
		t.Error("the damaged file was changed")
	}
}

func TestAppendRefusesOutOfOrder(t *testing.T) {
	s := newStore(t)
	id := create(t, s, 3)
	app, _, err := s.OpenAppender(id)
	if err != nil {
		t.Fatal(err)
	}
	defer app.Close()
	if err := app.Append(point(5)); err == nil {
		t.Fatal("appended point 5 after point 2")
	}
}

func TestRecordsRoundTripAndIDs(t *testing.T) {
	s := newStore(t)
	a := create(t, s, 0)
	b := create(t, s, 0)
	if a != "scan-000001" || b != "scan-000002" {
		t.Fatalf("IDs %s, %s", a, b)
	}
	recs, err := s.LoadRecords()
	if err != nil || len(recs) != 2 || recs[0].ID != a {
		t.Fatalf("records %v %v", recs, err)
	}
	s2, err := Open(t.TempDir(), slog.New(slog.DiscardHandler))
	if err != nil {
		t.Fatal(err)
	}
	defer s2.Close()
	for _, id := range []string{"scan-1", "series-000001", "../x", "scan-", "scan-12a", ""} {
		want := id == "scan-1" || id == "series-000001"
		if ValidID(id) != want {
			t.Errorf("ValidID(%q) = %v", id, !want)
		}
	}
}

func TestDataDirIsLocked(t *testing.T) {
	dir := t.TempDir()
	s, err := Open(dir, slog.New(slog.DiscardHandler))
	if err != nil {
		t.Fatal(err)
	}
	defer s.Close()
	if _, err := Open(dir, slog.New(slog.DiscardHandler)); err == nil || !strings.Contains(err.Error(), "in use") {
		t.Fatalf("second open: %v", err)
	}
}

func FuzzPointLine(f *testing.F) {
	f.Add(string(table.AppendCSV(nil, point(3))))
	f.Add("0,2026-12-02T01:00:00Z,1,2,1,2,1,5,5,1,5,1,30,0.8,,\n")
	f.Add("")
	f.Fuzz(func(t *testing.T, line string) {
		p, err := table.DecodeCSV([]byte(line))
		if err != nil {
			return
		}
		again, err := table.DecodeCSV(table.AppendCSV(nil, p))
		if err != nil {
			t.Fatalf("re-encoded line does not parse: %v", err)
		}
		if again.Index != p.Index || again.Counts != p.Counts {
			t.Fatalf("round trip changed the point")
		}
	})
}
