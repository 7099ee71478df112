//go:build !linux

package scpi

import "time"

// preciseSleep sleeps d as closely as the runtime's timers allow.
func preciseSleep(d time.Duration) { time.Sleep(d) }
