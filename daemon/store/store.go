// Package store keeps scans on disk, one directory per scan, readable without the daemon: the scan record as
// JSON (replaced atomically) and the points as an append-only CSV file, each batch fsynced before it is
// published. A torn last line from a crash is detected and dropped, never reported as data.
package store

import (
	"encoding/json"
	"errors"
	"fmt"
	"io/fs"
	"log/slog"
	"os"
	"path/filepath"
	"runtime"
	"sort"
	"strconv"
	"strings"
	"sync"

	"goniod/daemon/scan"
)

// File names inside the data directory.
const (
	scansDir    = "scans"
	seriesDir   = "series"
	resultsDir  = "results"
	recordFile  = "scan.json"
	alignFile   = "alignment.json"
	pointsFile  = "points.csv"
	lockFile    = "goniod.lock"
	scanPrefix  = "scan-"
	seriesPrefx = "series-"
)

// Store is a data directory. One daemon at a time may use it (a lock file enforces this).
type Store struct {
	dir  string
	log  *slog.Logger
	lock *os.File

	mu         sync.Mutex
	nextScan   int
	nextSeries int

	idxMu sync.Mutex
	idx   map[string]*pointIndex // offset index of points files, by scan ID

	// readers bounds the reads that decode ahead (see ReadPoints): as many as there are processors to run
	// them, whatever the number of watchers catching up at once; further reads decode as they go.
	readers chan struct{}
}

// Open opens (creating if needed) a data directory and takes its lock.
func Open(dir string, log *slog.Logger) (*Store, error) {
	for _, d := range []string{dir, filepath.Join(dir, scansDir), filepath.Join(dir, seriesDir)} {
		if err := os.MkdirAll(d, 0o750); err != nil {
			return nil, fmt.Errorf("data dir: %w", err)
		}
	}
	lf, err := os.OpenFile(filepath.Join(dir, lockFile), os.O_RDWR|os.O_CREATE, 0o640)
	if err != nil {
		return nil, fmt.Errorf("data dir lock: %w", err)
	}
	if err := lockExclusive(lf); err != nil {
		lf.Close()
		return nil, fmt.Errorf("data dir %s is in use by another goniod: %w", dir, err)
	}
	s := &Store{dir: dir, log: log, lock: lf, readers: make(chan struct{}, runtime.GOMAXPROCS(0))}
	s.nextScan = s.highest(filepath.Join(dir, scansDir), scanPrefix) + 1
	s.nextSeries = s.highest(filepath.Join(dir, seriesDir), seriesPrefx) + 1
	return s, nil
}

// Close releases the lock.
func (s *Store) Close() error {
	unlock(s.lock)
	return s.lock.Close()
}

// Dir is the data directory.
func (s *Store) Dir() string { return s.dir }

func (s *Store) highest(dir, prefix string) int {
	ents, _ := os.ReadDir(dir)
	max := 0
	for _, e := range ents {
		name := strings.TrimSuffix(e.Name(), ".json")
		if n, err := strconv.Atoi(strings.TrimPrefix(name, prefix)); err == nil && strings.HasPrefix(name, prefix) && n > max {
			max = n
		}
	}
	return max
}

// NewScanID reserves the next scan ID.
func (s *Store) NewScanID() string {
	s.mu.Lock()
	defer s.mu.Unlock()
	id := fmt.Sprintf("%s%06d", scanPrefix, s.nextScan)
	s.nextScan++
	return id
}

// NewSeriesID reserves the next series ID.
func (s *Store) NewSeriesID() string {
	s.mu.Lock()
	defer s.mu.Unlock()
	id := fmt.Sprintf("%s%06d", seriesPrefx, s.nextSeries)
	s.nextSeries++
	return id
}

// ValidID reports whether id has the form of a scan or series ID (so it is safe as a path element).
func ValidID(id string) bool {
	var rest string
	switch {
	case strings.HasPrefix(id, scanPrefix):
		rest = id[len(scanPrefix):]
	case strings.HasPrefix(id, seriesPrefx):
		rest = id[len(seriesPrefx):]
	default:
		return false
	}
	if len(rest) < 1 || len(rest) > 12 {
		return false
	}
	for _, c := range rest {
		if c < '0' || c > '9' {
			return false
		}
	}
	return true
}

func (s *Store) scanDir(id string) string { return filepath.Join(s.dir, scansDir, id) }

// PointsPath is the points file of a scan.
func (s *Store) PointsPath(id string) string { return filepath.Join(s.scanDir(id), pointsFile) }

// Create makes a new scan's directory with its record and an empty points file with the header.
func (s *Store) Create(rec *scan.Record, header string) error {
	dir := s.scanDir(rec.ID)
	if err := os.Mkdir(dir, 0o750); err != nil {
		return fmt.Errorf("create scan %s: %w", rec.ID, err)
	}
	if err := writeAtomic(filepath.Join(dir, pointsFile), []byte(header)); err != nil {
		return fmt.Errorf("create scan %s: %w", rec.ID, err)
	}
	if err := s.SaveRecord(rec); err != nil {
		return err
	}
	return syncDir(filepath.Join(s.dir, scansDir))
}

// SaveRecord replaces a scan's record atomically.
func (s *Store) SaveRecord(rec *scan.Record) error {
	b, err := json.MarshalIndent(rec, "", "  ")
	if err != nil {
		return fmt.Errorf("encode scan %s: %w", rec.ID, err)
	}
	if err := writeAtomic(filepath.Join(s.scanDir(rec.ID), recordFile), append(b, '\n')); err != nil {
		return fmt.Errorf("save scan %s: %w", rec.ID, err)
	}
	return nil
}

// LoadRecords reads every scan record, oldest first. A directory without a readable record is skipped with a
// warning (a crash between mkdir and the first record write leaves one).
func (s *Store) LoadRecords() ([]*scan.Record, error) {
	ents, err := os.ReadDir(filepath.Join(s.dir, scansDir))
	if err != nil {
		return nil, fmt.Errorf("list scans: %w", err)
	}
	var out []*scan.Record
	for _, e := range ents {
		if !e.IsDir() || !ValidID(e.Name()) {
			continue
		}
		rec, err := s.LoadRecord(e.Name())
		if err != nil {
			s.log.Warn("scan directory without a readable record, skipped", "scan", e.Name(), "err", err)
			continue
		}
		out = append(out, rec)
	}
	sort.Slice(out, func(i, j int) bool { return out[i].ID < out[j].ID })
	return out, nil
}

// LoadRecord reads one scan's record.
func (s *Store) LoadRecord(id string) (*scan.Record, error) {
	if !ValidID(id) {
		return nil, fmt.Errorf("load scan %q: not a scan ID", id)
	}
	b, err := os.ReadFile(filepath.Join(s.scanDir(id), recordFile))
	if err != nil {
		return nil, fmt.Errorf("load scan %s: %w", id, err)
	}
	var rec scan.Record
	if err := json.Unmarshal(b, &rec); err != nil {
		return nil, fmt.Errorf("load scan %s: %w", id, err)
	}
	return &rec, nil
}

// SaveSeries writes a series record atomically.
func (s *Store) SaveSeries(id string, v any) error {
	b, err := json.MarshalIndent(v, "", "  ")
	if err != nil {
		return fmt.Errorf("encode series %s: %w", id, err)
	}
	return writeAtomic(filepath.Join(s.dir, seriesDir, id+".json"), append(b, '\n'))
}

// LoadSeries reads a series record into v.
func (s *Store) LoadSeries(id string, v any) error {
	if !ValidID(id) {
		return fmt.Errorf("series %q: %w", id, scan.ErrNotFound)
	}
	b, err := os.ReadFile(filepath.Join(s.dir, seriesDir, id+".json"))
	if errors.Is(err, fs.ErrNotExist) {
		return fmt.Errorf("series %s: %w", id, scan.ErrNotFound)
	}
	if err != nil {
		return fmt.Errorf("read series %s: %w", id, err)
	}
	return json.Unmarshal(b, v)
}

// SaveAlignment stores the instrument's alignment (zero offsets found by the alignment routine) atomically, so
// that it survives a restart.
func (s *Store) SaveAlignment(v any) error {
	b, err := json.MarshalIndent(v, "", "  ")
	if err != nil {
		return fmt.Errorf("encode alignment: %w", err)
	}
	if err := writeAtomic(filepath.Join(s.dir, alignFile), append(b, '\n')); err != nil {
		return fmt.Errorf("save alignment: %w", err)
	}
	return nil
}

// AlignmentPath is the file that keeps the stored alignment.
func (s *Store) AlignmentPath() string { return filepath.Join(s.dir, alignFile) }

// LoadAlignment reads the stored alignment into v; found is false when none was stored.
func (s *Store) LoadAlignment(v any) (found bool, err error) {
	b, err := os.ReadFile(filepath.Join(s.dir, alignFile))
	if errors.Is(err, fs.ErrNotExist) {
		return false, nil
	}
	if err != nil {
		return false, fmt.Errorf("read alignment: %w", err)
	}
	if err := json.Unmarshal(b, v); err != nil {
		return false, fmt.Errorf("read alignment %s: %w", filepath.Join(s.dir, alignFile), err)
	}
	return true, nil
}

// SaveResult stores an analysis result beside a scan, as results/<kind>.json.
func (s *Store) SaveResult(id, kind string, b []byte) error {
	dir := filepath.Join(s.scanDir(id), resultsDir)
	if err := os.MkdirAll(dir, 0o750); err != nil {
		return fmt.Errorf("save %s result of %s: %w", kind, id, err)
	}
	return writeAtomic(filepath.Join(dir, kind+".json"), b)
}

// LoadResult reads a saved analysis result.
func (s *Store) LoadResult(id, kind string) ([]byte, error) {
	b, err := os.ReadFile(filepath.Join(s.scanDir(id), resultsDir, kind+".json"))
	if errors.Is(err, fs.ErrNotExist) {
		return nil, fmt.Errorf("%s result of %s: %w", kind, id, scan.ErrNotFound)
	}
	return b, err
}

// writeAtomic writes a file by writing a temporary file, fsyncing it, renaming it over the target and
// fsyncing the directory, so a crash leaves either the old or the new content.
func writeAtomic(path string, b []byte) error {
	dir := filepath.Dir(path)
	f, err := os.CreateTemp(dir, "."+filepath.Base(path)+".tmp*")
	if err != nil {
		return err
	}
	tmp := f.Name()
	if _, err := f.Write(b); err != nil {
		f.Close()
		os.Remove(tmp)
		return err
	}
	if err := f.Sync(); err != nil {
		f.Close()
		os.Remove(tmp)
		return err
	}
	if err := f.Close(); err != nil {
		os.Remove(tmp)
		return err
	}
	if err := os.Rename(tmp, path); err != nil {
		os.Remove(tmp)
		return err
	}
	return syncDir(dir)
}
