//go:build unix

package scpi

import (
	"time"

	"golang.org/x/sys/unix"
)

// preciseSleep sleeps d in the kernel: the Go runtime's timers round short sleeps up to about a millisecond,
// too coarse to pace a 115200 baud line (87 µs a byte).
func preciseSleep(d time.Duration) {
	ts := unix.NsecToTimespec(int64(d))
	for unix.Nanosleep(&ts, &ts) == unix.EINTR {
	}
}
