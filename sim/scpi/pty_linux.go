//go:build linux

package scpi

import (
	"errors"
	"fmt"
	"os"

	"github.com/creack/pty"
	"golang.org/x/sys/unix"
)

// PTY is a pseudo-terminal whose slave side is the instrument's serial device, e.g. /dev/pts/3.
type PTY struct {
	// Path is the device the host opens.
	Path string
	// master is a non-blocking duplicate of the master side: read deadlines work on it and Close interrupts a
	// blocked Read (the master pty.Open returns is blocking and has neither).
	master *os.File
	// slave is held open, so the line keeps the raw mode set here and the master never reads EIO while the
	// host has the device closed (between reconnections).
	slave *os.File
}

// OpenPTY opens a pseudo-terminal in raw mode: no echo, no line editing, all 256 byte values passed unchanged.
// Raw mode from the start matters: in the default cooked mode the line would echo the host's commands back
// to it before it opens the port.
func OpenPTY() (*PTY, error) {
	m, sl, err := pty.Open()
	if err != nil {
		return nil, fmt.Errorf("open pseudo-terminal: %w", err)
	}
	defer m.Close()
	if err := makeRaw(int(sl.Fd())); err != nil {
		sl.Close()
		return nil, fmt.Errorf("pseudo-terminal %s raw mode: %w", sl.Name(), err)
	}
	fd, err := unix.Dup(int(m.Fd()))
	if err == nil {
		err = unix.SetNonblock(fd, true)
	}
	if err != nil {
		sl.Close()
		return nil, fmt.Errorf("pseudo-terminal %s: %w", sl.Name(), err)
	}
	return &PTY{Path: sl.Name(), master: os.NewFile(uintptr(fd), "ptmx"), slave: sl}, nil
}

// makeRaw sets a terminal to raw mode, 8 data bits, no parity.
func makeRaw(fd int) error {
	t, err := unix.IoctlGetTermios(fd, unix.TCGETS)
	if err != nil {
		return err
	}
	t.Iflag &^= unix.IGNBRK | unix.BRKINT | unix.PARMRK | unix.ISTRIP | unix.INLCR | unix.IGNCR | unix.ICRNL | unix.IXON | unix.IXOFF
	t.Oflag &^= unix.OPOST
	t.Lflag &^= unix.ECHO | unix.ECHONL | unix.ICANON | unix.ISIG | unix.IEXTEN
	t.Cflag &^= unix.CSIZE | unix.PARENB
	t.Cflag |= unix.CS8
	t.Cc[unix.VMIN], t.Cc[unix.VTIME] = 1, 0
	return unix.IoctlSetTermios(fd, unix.TCSETS, t)
}

// Conn is the instrument's end of the line.
func (p *PTY) Conn() Conn { return p.master }

// Close closes both sides: the host's open port then reads "closed", as when a USB adapter is pulled.
func (p *PTY) Close() error { return errors.Join(p.master.Close(), p.slave.Close()) }
