//go:build !linux

package scpi

import (
	"errors"
	"runtime"
)

// PTY is a pseudo-terminal; this build has none.
type PTY struct{ Path string }

// OpenPTY reports that pseudo-terminals are not available here: serve a serial port instead.
func OpenPTY() (*PTY, error) {
	return nil, errors.New("pseudo-terminals are supported on Linux only (this is " + runtime.GOOS + "): serve a named serial port instead")
}

// Conn is never reached: OpenPTY fails.
func (p *PTY) Conn() Conn { return nil }

// Close does nothing.
func (p *PTY) Close() error { return nil }
