//go:build linux

package scpi

import (
	"runtime"
	"time"

	"golang.org/x/sys/unix"
)

// spinFor is the last stretch of a precise sleep, spent watching the clock: the kernel's sleeps overshoot by
// about 0.1 ms (timer slack and wake-up), more than a byte takes at 115200 baud (87 µs).
const spinFor = 150 * time.Microsecond

// preciseSleep sleeps d in the kernel, then watches the clock for the rest. The Go runtime's timers round
// short sleeps up to about a millisecond, far too coarse to pace a serial line.
func preciseSleep(d time.Duration) {
	end := time.Now().Add(d)
	if d > spinFor {
		ts := unix.NsecToTimespec(int64(d - spinFor))
		for unix.Nanosleep(&ts, &ts) == unix.EINTR {
		}
	}
	for time.Now().Before(end) {
		runtime.Gosched()
	}
}
