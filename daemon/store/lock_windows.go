//go:build windows

package store

import (
	"os"

	"golang.org/x/sys/windows"
)

func lockExclusive(f *os.File) error {
	ol := new(windows.Overlapped)
	return windows.LockFileEx(windows.Handle(f.Fd()), windows.LOCKFILE_EXCLUSIVE_LOCK|windows.LOCKFILE_FAIL_IMMEDIATELY, 0, 1, 0, ol)
}

func unlock(f *os.File) {
	ol := new(windows.Overlapped)
	_ = windows.UnlockFileEx(windows.Handle(f.Fd()), 0, 1, 0, ol)
}

// syncDir is a no-op on Windows: directories cannot be opened for fsync there; NTFS journals renames.
func syncDir(string) error { return nil }
