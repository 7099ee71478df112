package store

import (
	"bytes"
	"errors"
	"os"
	"strings"
	"syscall"
	"testing"
)

// failingFile is a points file whose next write, sync or truncate fails the way a full or read-only disk does.
type failingFile struct {
	*os.File
	// partial: the failing write still puts this many bytes on disk (a short write).
	partial                       int
	failWrite, failSync, failTrim bool
}

func (f *failingFile) Write(b []byte) (int, error) {
	if f.failWrite {
		n, _ := f.File.Write(b[:min(f.partial, len(b))])
		return n, syscall.ENOSPC
	}
	return f.File.Write(b)
}

func (f *failingFile) Sync() error {
	if f.failSync {
		return syscall.EIO
	}
	return f.File.Sync()
}

func (f *failingFile) Truncate(size int64) error {
	if f.failTrim {
		return syscall.EROFS
	}
	return f.File.Truncate(size)
}

// A failed append (disk full mid-line, or a failed fsync) leaves the file exactly as it was, and appending goes
// on at the right index once the disk has room again.
func TestFailedAppendDamagesNothing(t *testing.T) {
	cases := []struct {
		name string
		fail failingFile
	}{
		{"disk full before the line", failingFile{failWrite: true}},
		{"disk full mid-line", failingFile{failWrite: true, partial: 17}},
		{"fsync fails", failingFile{failSync: true}},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			s := newStore(t)
			id := create(t, s, 20)
			before, err := os.ReadFile(s.PointsPath(id))
			if err != nil {
				t.Fatal(err)
			}
			app, _, err := s.OpenAppender(id)
			if err != nil {
				t.Fatal(err)
			}
			defer app.Close()
			ff := tc.fail
			ff.File = app.f.(*os.File)
			app.f = &ff
			err = app.Append(point(20), point(21))
			if err == nil {
				t.Fatal("append succeeded on a failing disk")
			}
			if !errors.Is(err, syscall.ENOSPC) && !errors.Is(err, syscall.EIO) {
				t.Errorf("error %v does not carry the disk's error", err)
			}
			after, _ := os.ReadFile(s.PointsPath(id))
			if !bytes.Equal(before, after) {
				t.Fatalf("the points file changed: %d bytes before, %d after", len(before), len(after))
			}
			if app.Count() != 20 {
				t.Errorf("count %d after a failed append, want 20", app.Count())
			}
			ff.failWrite, ff.failSync = false, false
			if err := app.Append(point(20)); err != nil {
				t.Fatalf("append after the disk recovered: %v", err)
			}
			if got := readIndexes(t, s, id, 0, 0); len(got) != 21 || got[20] != 20 {
				t.Fatalf("after recovery: %d points", len(got))
			}
		})
	}
}

// When even cutting back fails (a disk gone read-only), the appender refuses further points, and the next
// open drops the torn tail and keeps every durable point.
func TestAppendAfterFailedCutIsRefused(t *testing.T) {
	s := newStore(t)
	id := create(t, s, 5)
	app, _, err := s.OpenAppender(id)
	if err != nil {
		t.Fatal(err)
	}
	ff := &failingFile{File: app.f.(*os.File), failWrite: true, partial: 9, failTrim: true}
	app.f = ff
	if err := app.Append(point(5)); err == nil {
		t.Fatal("append succeeded on a failing disk")
	}
	ff.failWrite, ff.failTrim = false, false
	if err := app.Append(point(5)); err == nil || !strings.Contains(err.Error(), "unusable") {
		t.Fatalf("append after a failed cut: %v, want a refusal", err)
	}
	app.Close()
	if got := readIndexes(t, s, id, 0, 0); len(got) != 5 {
		t.Fatalf("reader sees %d points, want the 5 durable ones", len(got))
	}
	app, rec, err := s.OpenAppender(id)
	if err != nil {
		t.Fatal(err)
	}
	defer app.Close()
	if rec.Points != 5 || rec.DroppedBytes != 9 {
		t.Fatalf("reopen recovered %+v, want 5 points and 9 torn bytes dropped", rec)
	}
}
