package store

import (
	"bufio"
	"bytes"
	"fmt"
	"io"
	"os"
	"sync"

	goniodv1 "goniod/proto/goniod/v1"
)

// indexStride is the number of points between two remembered line offsets. A read from point i seeks to the
// remembered line at or before i and skips fewer than indexStride lines; the index costs 8 bytes per stride
// (about 8 KB for a scan of a million points).
const indexStride = 1024

// pointIndex remembers where every indexStride-th point's line starts in one points file. It is built on
// demand by counting newlines, which is much faster than decoding lines, and extended as the file grows.
// Only complete lines count. Appenders make the store forget a file's index whenever they cut the file back.
type pointIndex struct {
	mu    sync.Mutex
	table *goniodv1.PointTable
	// offsets[k] is the offset of the line of point k·indexStride.
	offsets []int64
	// scanned is the offset just after the last complete line counted; lines is how many points precede it.
	scanned int64
	lines   int
}

// maxIndexes is how many points files' indexes the store keeps: enough for the scans being taken, watched and
// fetched at one time, so that memory does not grow with every scan ever read.
const maxIndexes = 64

// index returns the offset index of a scan's points file, creating an empty one. With maxIndexes kept, one
// chosen at random makes way (a later read of its file builds it again).
func (s *Store) index(id string) *pointIndex {
	s.idxMu.Lock()
	defer s.idxMu.Unlock()
	if s.idx == nil {
		s.idx = map[string]*pointIndex{}
	}
	ix := s.idx[id]
	if ix == nil {
		for other := range s.idx {
			if len(s.idx) < maxIndexes {
				break
			}
			delete(s.idx, other)
		}
		ix = &pointIndex{}
		s.idx[id] = ix
	}
	return ix
}

// forgetIndex drops a scan's offset index (its file was cut back).
func (s *Store) forgetIndex(id string) {
	s.idxMu.Lock()
	defer s.idxMu.Unlock()
	delete(s.idx, id)
}

// locate returns the layout of an open points file and the offset of the line of point at, the latest
// indexed point at or before from. When the file ends before from, at is the last indexed point.
func (s *Store) locate(f *os.File, id string, from int) (*goniodv1.PointTable, int64, int, error) {
	ix := s.index(id)
	ix.mu.Lock()
	defer ix.mu.Unlock()
	if ix.table == nil {
		if err := ix.start(f); err != nil {
			return nil, 0, 0, err
		}
	}
	want := max(from, 0) / indexStride
	if want >= len(ix.offsets) {
		if err := ix.extend(f, want); err != nil {
			return nil, 0, 0, err
		}
	}
	k := min(want, len(ix.offsets)-1)
	return ix.table, ix.offsets[k], k * indexStride, nil
}

// start reads the header line.
func (ix *pointIndex) start(f *os.File) error {
	header, err := bufio.NewReader(io.NewSectionReader(f, 0, 1<<20)).ReadBytes('\n')
	if err != nil {
		return fmt.Errorf("no complete header line: %w", err)
	}
	table, err := goniodv1.ParsePointTable(string(header))
	if err != nil {
		return err
	}
	ix.table = table
	ix.offsets = []int64{int64(len(header))}
	ix.scanned = int64(len(header))
	return nil
}

// extend counts lines from where the index stopped until it holds the offset of stride want or the file ends.
func (ix *pointIndex) extend(f *os.File, want int) error {
	buf := make([]byte, 1<<16)
	for len(ix.offsets) <= want {
		n, err := f.ReadAt(buf, ix.scanned)
		chunk := buf[:n]
		for {
			nl := bytes.IndexByte(chunk, '\n')
			if nl < 0 {
				break
			}
			ix.scanned += int64(nl + 1)
			ix.lines++
			chunk = chunk[nl+1:]
			if ix.lines%indexStride == 0 {
				ix.offsets = append(ix.offsets, ix.scanned)
			}
		}
		if err == io.EOF || (err == nil && n == 0) {
			return nil
		}
		if err != nil {
			return err
		}
		if len(chunk) == n {
			return nil // a line longer than the buffer: not ours; ReadPoints reports it
		}
	}
	return nil
}
