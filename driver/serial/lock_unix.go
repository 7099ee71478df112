//go:build unix

package serial

import (
	"errors"
	"os"

	"golang.org/x/sys/unix"
)

// lockPort takes an exclusive advisory lock (flock) on the device, as serial tools conventionally do.
func lockPort(dev string) (unlock func(), err error) {
	f, err := os.OpenFile(dev, os.O_RDONLY|unix.O_NOCTTY|unix.O_NONBLOCK, 0)
	if err != nil {
		return nil, err
	}
	if err := unix.Flock(int(f.Fd()), unix.LOCK_EX|unix.LOCK_NB); err != nil {
		f.Close()
		if errors.Is(err, unix.EWOULDBLOCK) {
			return nil, errPortInUse
		}
		return nil, err
	}
	return func() { f.Close() }, nil
}
