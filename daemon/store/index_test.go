package store

import (
	"context"
	"fmt"
	"os"
	"runtime"
	"testing"

	goniodv1 "goniod/proto/goniod/v1"
)

// fill appends points [from, to) to a scan in batches (one fsync per batch).
func fill(t testing.TB, s *Store, id string, from, to int) {
	t.Helper()
	app, _, err := s.OpenAppender(id)
	if err != nil {
		t.Fatal(err)
	}
	defer app.Close()
	const batch = 10000
	ps := make([]*goniodv1.Point, 0, batch)
	for i := from; i < to; i++ {
		ps = append(ps, point(i))
		if len(ps) == batch || i == to-1 {
			if err := app.Append(ps...); err != nil {
				t.Fatal(err)
			}
			ps = ps[:0]
		}
	}
}

// Every page, whatever its start relative to the index stride, holds exactly the points asked for.
func TestReadPagesAcrossTheIndex(t *testing.T) {
	s := newStore(t)
	id := create(t, s, 0)
	const n = 3*indexStride + 100
	fill(t, s, id, 0, n)
	cases := []struct{ from, limit, want int }{
		{0, 5, 5},
		{indexStride - 1, 3, 3},
		{indexStride, 1, 1},
		{indexStride + 1, 2 * indexStride, 2 * indexStride},
		{3*indexStride - 2, 0, 102},
		{n - 1, 10, 1},
		{n, 10, 0},
		{n + 5*indexStride, 0, 0},
	}
	for _, tc := range cases {
		t.Run(fmt.Sprintf("from %d limit %d", tc.from, tc.limit), func(t *testing.T) {
			got := readIndexes(t, s, id, tc.from, tc.limit)
			if len(got) != tc.want {
				t.Fatalf("%d points, want %d", len(got), tc.want)
			}
			for k, idx := range got {
				if idx != tc.from+k {
					t.Fatalf("point %d of the page has index %d, want %d", k, idx, tc.from+k)
				}
			}
		})
	}
}

// The store keeps a bounded number of indexes, and a file whose index made way reads as before.
func TestIndexesAreBounded(t *testing.T) {
	s := newStore(t)
	var ids []string
	for range 2 * maxIndexes {
		id := create(t, s, 0)
		fill(t, s, id, 0, 3)
		if got := readIndexes(t, s, id, 1, 0); len(got) != 2 || got[0] != 1 {
			t.Fatalf("scan %s read %v, want points 1 and 2", id, got)
		}
		ids = append(ids, id)
	}
	s.idxMu.Lock()
	n := len(s.idx)
	s.idxMu.Unlock()
	if n > maxIndexes {
		t.Errorf("%d indexes kept after reading %d scans, want at most %d", n, len(ids), maxIndexes)
	}
	if got := readIndexes(t, s, ids[0], 0, 0); len(got) != 3 {
		t.Errorf("the first scan read back %d points, want 3", len(got))
	}
}

// The index grows with the file, and forgets what a torn-line cut removed: points appended after the cut are
// read at their true offsets.
func TestIndexFollowsGrowthAndCuts(t *testing.T) {
	s := newStore(t)
	id := create(t, s, 0)
	fill(t, s, id, 0, 2*indexStride+10)
	if got := readIndexes(t, s, id, 2*indexStride+5, 0); len(got) != 5 {
		t.Fatalf("read %d points from %d", len(got), 2*indexStride+5)
	}
	fill(t, s, id, 2*indexStride+10, 4*indexStride)
	if got := readIndexes(t, s, id, 4*indexStride-3, 0); len(got) != 3 || got[0] != 4*indexStride-3 {
		t.Fatalf("after growth: %v", got)
	}
	// A damaged last line that the index counts, then recovery (which cuts it) and new points of other
	// lengths at the same indexes: an index that kept the damaged line would misplace them.
	f, err := os.OpenFile(s.PointsPath(id), os.O_APPEND|os.O_WRONLY, 0)
	if err != nil {
		t.Fatal(err)
	}
	f.WriteString("4096,damaged\n")
	f.Close()
	if got := readIndexes(t, s, id, 5*indexStride, 0); len(got) != 0 {
		t.Fatalf("read %v beyond the end", got)
	}
	app, rec, err := s.OpenAppender(id)
	if err != nil || rec.Points != 4*indexStride || rec.DroppedBytes == 0 {
		t.Fatalf("recovery %+v, %v", rec, err)
	}
	for i := 4 * indexStride; i < 5*indexStride+3; i++ {
		p := point(i)
		p.Counts = uint64(i) * 1000003 // longer lines than before
		if err := app.Append(p); err != nil {
			t.Fatal(err)
		}
	}
	app.Close()
	var counts []uint64
	err = s.ReadPoints(context.Background(), id, 5*indexStride, 0, func(p *goniodv1.Point) error {
		if int(p.Index) != 5*indexStride+len(counts) {
			return fmt.Errorf("point index %d at position %d", p.Index, len(counts))
		}
		counts = append(counts, p.Counts)
		return nil
	})
	if err != nil || len(counts) != 3 || counts[0] != uint64(5*indexStride)*1000003 {
		t.Fatalf("after the cut: %v %v", counts, err)
	}
}

// largeScanPoints is the size of the streaming test: a million points, fewer under the race detector (which
// slows decoding about tenfold); BenchmarkReadMillionPoints always uses a million.
func largeScanPoints() int {
	if raceEnabled {
		return 200_000
	}
	return 1_000_000
}

// Reading a large scan streams: the heap stays far below the file's size while every point is delivered.
func TestReadLargeScanStreams(t *testing.T) {
	s := newStore(t)
	id := create(t, s, 0)
	n := largeScanPoints()
	fill(t, s, id, 0, n)
	st, err := os.Stat(s.PointsPath(id))
	if err != nil {
		t.Fatal(err)
	}
	runtime.GC()
	var ms runtime.MemStats
	runtime.ReadMemStats(&ms)
	base, peak := ms.HeapAlloc, ms.HeapAlloc
	seen := 0
	err = s.ReadPoints(context.Background(), id, 0, 0, func(p *goniodv1.Point) error {
		if int(p.Index) != seen {
			return fmt.Errorf("point %d at position %d", p.Index, seen)
		}
		seen++
		if seen%20000 == 0 {
			runtime.ReadMemStats(&ms)
			peak = max(peak, ms.HeapAlloc)
		}
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	if seen != n {
		t.Fatalf("read %d of %d points", seen, n)
	}
	grown := int64(peak) - int64(base)
	t.Logf("%d points, file %.1f MB, heap grew by at most %.1f MB while reading", n, float64(st.Size())/1e6, float64(grown)/1e6)
	if limit := st.Size() / 4; grown > limit {
		t.Errorf("heap grew by %d bytes reading a %d-byte file: the reader holds the scan in memory", grown, st.Size())
	}
}

func TestAlignmentRoundTrip(t *testing.T) {
	s := newStore(t)
	type offsets struct{ Theta, TwoTheta float64 }
	var got offsets
	if found, err := s.LoadAlignment(&got); found || err != nil {
		t.Fatalf("empty data dir: found %v, %v", found, err)
	}
	if err := s.SaveAlignment(offsets{0.37, -0.52}); err != nil {
		t.Fatal(err)
	}
	if found, err := s.LoadAlignment(&got); !found || err != nil || got != (offsets{0.37, -0.52}) {
		t.Fatalf("loaded %+v found %v err %v", got, found, err)
	}
}

// benchScan makes a store holding one scan of n points, once per benchmark run.
func benchScan(b *testing.B, n int) (dir, id string) {
	b.Helper()
	dir = b.TempDir()
	s, err := Open(dir, discard)
	if err != nil {
		b.Fatal(err)
	}
	defer s.Close()
	id = create(b, s, 0)
	fill(b, s, id, 0, n)
	return dir, id
}

// BenchmarkReadLatePoints reads the last 100 points of a million-point scan: "cold" opens a new store each time
// (the index is built by counting newlines), "warm" reuses the store's index, "no index" shows what the read
// costs when every line before the page is read (the index stride set beyond the scan).
func BenchmarkReadLatePoints(b *testing.B) {
	const n = 1_000_000
	dir, id := benchScan(b, n)
	read := func(b *testing.B, s *Store) {
		got := 0
		err := s.ReadPoints(context.Background(), id, n-100, 0, func(*goniodv1.Point) error { got++; return nil })
		if err != nil || got != 100 {
			b.Fatalf("read %d points: %v", got, err)
		}
	}
	b.Run("cold", func(b *testing.B) {
		for b.Loop() {
			s, err := Open(dir, discard)
			if err != nil {
				b.Fatal(err)
			}
			read(b, s)
			s.Close()
		}
	})
	b.Run("warm", func(b *testing.B) {
		s, err := Open(dir, discard)
		if err != nil {
			b.Fatal(err)
		}
		defer s.Close()
		read(b, s)
		for b.Loop() {
			read(b, s)
		}
	})
	b.Run("no index", func(b *testing.B) {
		s, err := Open(dir, discard)
		if err != nil {
			b.Fatal(err)
		}
		defer s.Close()
		for b.Loop() {
			s.forgetIndex(id)
			ix := s.index(id)
			f, err := os.Open(s.PointsPath(id))
			if err != nil {
				b.Fatal(err)
			}
			ix.mu.Lock()
			err = ix.start(f) // header only: the read skips every line from point 0
			ix.mu.Unlock()
			f.Close()
			if err != nil {
				b.Fatal(err)
			}
			ix.offsets, ix.scanned = ix.offsets[:1], 1<<62
			read(b, s)
		}
	})
}

// BenchmarkReadMillionPoints streams a whole million-point scan and reports the heap's growth.
func BenchmarkReadMillionPoints(b *testing.B) {
	const n = 1_000_000
	dir, id := benchScan(b, n)
	s, err := Open(dir, discard)
	if err != nil {
		b.Fatal(err)
	}
	defer s.Close()
	var ms runtime.MemStats
	var grown uint64
	b.ResetTimer()
	for b.Loop() {
		runtime.GC()
		runtime.ReadMemStats(&ms)
		base := ms.HeapAlloc
		got := 0
		err := s.ReadPoints(context.Background(), id, 0, 0, func(*goniodv1.Point) error {
			got++
			if got%50000 == 0 {
				runtime.ReadMemStats(&ms)
				grown = max(grown, ms.HeapAlloc-min(base, ms.HeapAlloc))
			}
			return nil
		})
		if err != nil || got != n {
			b.Fatalf("read %d points: %v", got, err)
		}
	}
	b.ReportMetric(float64(n)*float64(b.N)/b.Elapsed().Seconds(), "points/s")
	b.ReportMetric(float64(grown)/1e6, "peak-heap-growth-MB")
}
