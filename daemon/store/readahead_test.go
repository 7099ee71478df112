package store

import (
	"context"
	"errors"
	"fmt"
	"os"
	"strings"
	"sync"
	"testing"

	goniodv1 "goniod/proto/goniod/v1"
)

// Reads that decode ahead give every point once and in order, also when more run at once than there are
// slots to decode ahead; a read stopped by its caller, by its context or by a damaged line returns that error;
// and every slot is free afterwards.
func TestReadAhead(t *testing.T) {
	s := newStore(t)
	id := create(t, s, 0)
	const n = 10*readBatch + 17
	fill(t, s, id, 0, n)
	check := func(from, limit int) error {
		next := from
		err := s.ReadPoints(context.Background(), id, from, limit, func(p *goniodv1.Point) error {
			if int(p.Index) != next {
				return fmt.Errorf("point %d where %d was due", p.Index, next)
			}
			next++
			return nil
		})
		want := n
		if limit > 0 {
			want = min(n, from+limit)
		}
		if err == nil && next != want {
			err = fmt.Errorf("read from %d, limit %d: ended before point %d, want %d", from, limit, next, want)
		}
		return err
	}
	var wg sync.WaitGroup
	errs := make(chan error, 4*cap(s.readers)+4)
	for i := range cap(errs) {
		wg.Add(1)
		go func() {
			defer wg.Done()
			errs <- check(i*37, []int{0, 3 * readBatch, readBatch + 1}[i%3])
		}()
	}
	wg.Wait()
	close(errs)
	for err := range errs {
		if err != nil {
			t.Fatal(err)
		}
	}

	stop := errors.New("enough")
	got := 0
	err := s.ReadPoints(context.Background(), id, 0, 0, func(*goniodv1.Point) error {
		if got++; got == 700 {
			return stop
		}
		return nil
	})
	if !errors.Is(err, stop) || got != 700 {
		t.Errorf("a read its caller stopped at point 700: %v after %d points", err, got)
	}

	ctx, cancel := context.WithCancel(context.Background())
	got = 0
	err = s.ReadPoints(ctx, id, 0, 0, func(*goniodv1.Point) error {
		if got++; got == 300 {
			cancel()
		}
		return nil
	})
	if !errors.Is(err, context.Canceled) || got >= n {
		t.Errorf("a read whose context ended: %v after %d points", err, got)
	}

	b, err := os.ReadFile(s.PointsPath(id))
	if err != nil {
		t.Fatal(err)
	}
	lines := strings.SplitAfter(string(b), "\n")
	lines[1+5*readBatch] = "garbage\n"
	if err := os.WriteFile(s.PointsPath(id), []byte(strings.Join(lines, "")), 0o640); err != nil {
		t.Fatal(err)
	}
	got = 0
	err = s.ReadPoints(context.Background(), id, 0, 0, func(*goniodv1.Point) error { got++; return nil })
	if !errors.Is(err, goniodv1.ErrBadLine) || got != 5*readBatch {
		t.Errorf("a read meeting a damaged line at point %d: %v after %d points", 5*readBatch, err, got)
	}
	if len(s.readers) != 0 {
		t.Errorf("%d slots to decode ahead still taken after every read ended", len(s.readers))
	}
}
