package store

import (
	"bufio"
	"bytes"
	"context"
	"errors"
	"fmt"
	"io"
	"os"

	goniodv1 "goniod/proto/goniod/v1"
)

// ErrDamaged marks a points file whose content is damaged beyond a torn last line (it needs a person, not a
// retry).
var ErrDamaged = errors.New("points file damaged")

// appendFile is what an Appender needs of its file (an *os.File; tests put a failing one in its place).
type appendFile interface {
	io.Writer
	Sync() error
	Truncate(size int64) error
	Seek(offset int64, whence int) (int64, error)
	Close() error
}

// Appender appends points to one scan's points file. Not safe for concurrent use: the scan engine owns it.
type Appender struct {
	f     appendFile
	table *goniodv1.PointTable
	count int
	size  int64
	buf   []byte
	// cut is called when the file is cut back, so that readers' offset index forgets what was cut.
	cut func()
	// broken is set when a failed write could not be undone: the file's tail is unknown until it is reopened.
	broken error
}

// Recovered describes what opening a points file for append found.
type Recovered struct {
	// Points is the number of intact points.
	Points int
	// DroppedBytes is the size of a torn or damaged last line that was cut off (0 when the file was clean).
	DroppedBytes int64
}

// OpenAppender opens a scan's points file for appending. It checks the file: a last line without its newline,
// or one that does not parse as the next point, is torn by a crash and is cut off. Every earlier line must be
// intact; if one is not, the file is left alone and an error is returned.
func (s *Store) OpenAppender(id string) (*Appender, Recovered, error) {
	path := s.PointsPath(id)
	f, err := os.OpenFile(path, os.O_RDWR, 0)
	if err != nil {
		return nil, Recovered{}, fmt.Errorf("open points of %s: %w", id, err)
	}
	table, count, good, total, err := scanPoints(f)
	if err != nil {
		f.Close()
		return nil, Recovered{}, fmt.Errorf("points of %s: %w", id, err)
	}
	rec := Recovered{Points: count, DroppedBytes: total - good}
	if good < total {
		s.forgetIndex(id)
		if err := f.Truncate(good); err != nil {
			f.Close()
			return nil, rec, fmt.Errorf("cut torn line of %s: %w", id, err)
		}
		if err := f.Sync(); err != nil {
			f.Close()
			return nil, rec, fmt.Errorf("cut torn line of %s: %w", id, err)
		}
	}
	if _, err := f.Seek(good, io.SeekStart); err != nil {
		f.Close()
		return nil, rec, err
	}
	return &Appender{f: f, table: table, count: count, size: good, cut: func() { s.forgetIndex(id) }}, rec, nil
}

// scanPoints reads a points file from the start: its layout, the number of intact points, the offset just
// after the last intact line, and the file size. Only the last line may be bad.
func scanPoints(f *os.File) (table *goniodv1.PointTable, count int, good, total int64, err error) {
	r := bufio.NewReaderSize(f, 1<<16)
	header, err := r.ReadBytes('\n')
	if err == io.EOF {
		return nil, 0, 0, 0, fmt.Errorf("%w: no complete header line", ErrDamaged)
	}
	if err != nil {
		return nil, 0, 0, 0, err
	}
	table, err = goniodv1.ParsePointTable(string(header))
	if err != nil {
		return nil, 0, 0, 0, fmt.Errorf("%w: %w", ErrDamaged, err)
	}
	good = int64(len(header))
	total = good
	var bad error
	for {
		line, rerr := r.ReadBytes('\n')
		total += int64(len(line))
		if len(line) > 0 {
			if bad != nil {
				return nil, 0, 0, 0, fmt.Errorf("%w: point %d is damaged and not the last line: %w", ErrDamaged, count, bad)
			}
			switch {
			case line[len(line)-1] != '\n':
				bad = errors.New("torn last line")
			default:
				p, derr := table.DecodeCSV(line)
				switch {
				case derr != nil:
					bad = derr
				case int(p.Index) != count:
					bad = fmt.Errorf("line holds point %d, expected %d", p.Index, count)
				default:
					count++
					good = total
				}
			}
		}
		if rerr == io.EOF {
			return table, count, good, total, nil
		}
		if rerr != nil {
			return nil, 0, 0, 0, rerr
		}
	}
}

// Count is the number of points in the file.
func (a *Appender) Count() int { return a.count }

// Table is the file's column layout.
func (a *Appender) Table() *goniodv1.PointTable { return a.table }

// Append writes points and fsyncs them; when it returns nil they are durable. On an error the file is cut back
// to the last durable point, so nothing already stored is damaged; when even that fails, the appender refuses
// further points (the next OpenAppender drops the torn tail).
func (a *Appender) Append(points ...*goniodv1.Point) error {
	if a.broken != nil {
		return fmt.Errorf("points file unusable after an earlier failure: %w", a.broken)
	}
	a.buf = a.buf[:0]
	for i, p := range points {
		if int(p.Index) != a.count+i {
			return fmt.Errorf("append point %d: expected index %d", p.Index, a.count+i)
		}
		a.buf = a.table.AppendCSV(a.buf, p)
	}
	if _, err := a.f.Write(a.buf); err != nil {
		a.rollback(err)
		return fmt.Errorf("write points: %w", err)
	}
	if err := a.f.Sync(); err != nil {
		a.rollback(err)
		return fmt.Errorf("sync points: %w", err)
	}
	a.count += len(points)
	a.size += int64(len(a.buf))
	return nil
}

// rollback cuts the file back to its last durable point after a failed write or sync.
func (a *Appender) rollback(cause error) {
	a.cut()
	if err := a.f.Truncate(a.size); err != nil {
		a.broken = fmt.Errorf("%v, and cutting back failed: %w", cause, err)
		return
	}
	if _, err := a.f.Seek(a.size, io.SeekStart); err != nil {
		a.broken = fmt.Errorf("%v, and seeking back failed: %w", cause, err)
	}
}

// Close closes the file.
func (a *Appender) Close() error { return a.f.Close() }

// Reading ahead: a read of more than readBatch points decodes its lines on a goroutine of its own, at most
// readAhead batches ahead of fn, so that decoding and the caller's work on the points (a gRPC send) run side
// by side. The points in flight bound the memory of one read, about (readAhead+2)·readBatch points (some
// 400 KB), and Store.readers the number of such reads at once.
const (
	readBatch = 256
	readAhead = 2
)

// ReadPoints calls fn for the points of a scan with from <= index < from+limit (limit 0: to the end), in
// order, reading the file as a stream: memory does not grow with the scan. A late from seeks through the
// store's offset index instead of reading the file from its start. A torn last line is skipped.
func (s *Store) ReadPoints(ctx context.Context, id string, from, limit int, fn func(*goniodv1.Point) error) error {
	f, err := os.Open(s.PointsPath(id))
	if err != nil {
		return fmt.Errorf("read points of %s: %w", id, err)
	}
	defer f.Close()
	table, off, at, err := s.locate(f, id, from)
	if err != nil {
		return fmt.Errorf("points of %s: %w", id, err)
	}
	if _, err := f.Seek(off, io.SeekStart); err != nil {
		return fmt.Errorf("points of %s: %w", id, err)
	}
	rd := &lineReader{r: bufio.NewReaderSize(f, 1<<16), table: table, id: id, next: at, from: from, limit: limit}
	if limit > 0 && limit <= readBatch {
		return rd.each(ctx, fn)
	}
	select {
	case s.readers <- struct{}{}:
		defer func() { <-s.readers }()
		return rd.ahead(ctx, fn)
	default:
		return rd.each(ctx, fn)
	}
}

// lineReader decodes the points of one read from an open points file.
type lineReader struct {
	r     *bufio.Reader
	table *goniodv1.PointTable
	id    string
	next  int // index of the point on the next line
	from  int
	limit int
}

// each calls fn for every point of the read, on the caller's goroutine.
func (rd *lineReader) each(ctx context.Context, fn func(*goniodv1.Point) error) error {
	for {
		p, err := rd.point(ctx)
		if p == nil || err != nil {
			return err
		}
		if err := fn(p); err != nil {
			return err
		}
	}
}

// ahead decodes on a goroutine that ends before ahead returns, and calls fn on the caller's goroutine.
func (rd *lineReader) ahead(ctx context.Context, fn func(*goniodv1.Point) error) error {
	ctx, cancel := context.WithCancel(ctx)
	defer cancel()
	batches := make(chan []*goniodv1.Point, readAhead)
	var readErr error
	go func() {
		defer close(batches)
		for {
			batch := make([]*goniodv1.Point, 0, readBatch)
			for len(batch) < readBatch {
				p, err := rd.point(ctx)
				if err != nil {
					readErr = err
				}
				if p == nil {
					break
				}
				batch = append(batch, p)
			}
			if len(batch) > 0 {
				select {
				case batches <- batch:
				case <-ctx.Done():
					readErr = ctx.Err()
					return
				}
			}
			if len(batch) < readBatch {
				return
			}
		}
	}()
	for batch := range batches {
		for _, p := range batch {
			if err := fn(p); err != nil {
				cancel()
				for range batches { // let the reader end
				}
				return err
			}
		}
	}
	return readErr // written before batches was closed
}

// point decodes the next point of the read; nil at the end of the read or of the durable points.
func (rd *lineReader) point(ctx context.Context) (*goniodv1.Point, error) {
	for rd.limit == 0 || rd.next < rd.from+rd.limit {
		i := rd.next
		line, err := rd.r.ReadSlice('\n')
		if errors.Is(err, bufio.ErrBufferFull) {
			return nil, fmt.Errorf("points of %s: line %d too long", rd.id, i+2)
		}
		if err != nil {
			return nil, nil // EOF or a torn last line: the end of the durable points
		}
		rd.next++
		if i < rd.from {
			continue
		}
		if i%256 == 0 && ctx.Err() != nil {
			return nil, ctx.Err()
		}
		p, err := rd.table.DecodeCSV(line)
		if err != nil {
			return nil, fmt.Errorf("points of %s, point %d: %w", rd.id, i, err)
		}
		return p, nil
	}
	return nil, nil
}

// ReadTable returns a scan's points layout.
func (s *Store) ReadTable(id string) (*goniodv1.PointTable, error) {
	f, err := os.Open(s.PointsPath(id))
	if err != nil {
		return nil, err
	}
	defer f.Close()
	header, err := bufio.NewReader(f).ReadBytes('\n')
	if err != nil {
		return nil, fmt.Errorf("points of %s: no header: %w", id, err)
	}
	return goniodv1.ParsePointTable(string(header))
}

// CountPoints counts the complete lines of a scan's points file (a quick count; OpenAppender checks them).
func (s *Store) CountPoints(id string) (int, error) {
	f, err := os.Open(s.PointsPath(id))
	if err != nil {
		return 0, err
	}
	defer f.Close()
	buf := make([]byte, 1<<16)
	n := 0
	for {
		k, err := f.Read(buf)
		n += bytes.Count(buf[:k], []byte{'\n'})
		if err == io.EOF {
			break
		}
		if err != nil {
			return 0, err
		}
	}
	if n == 0 {
		return 0, nil
	}
	return n - 1, nil
}
