package scpi

import (
	"context"
	"errors"
	"fmt"
	"os"
	"sync"
	"time"

	goserial "go.bug.st/serial"
)

// PTYOptions configure ServePTY.
type PTYOptions struct {
	// Link, when set, is a symbolic link made to the pseudo-terminal and replaced by each new one, so the
	// device reappears at the same path (as a stable by-id link does for a USB adapter).
	Link string
	// Announce is told the device path of each pseudo-terminal once it is served.
	Announce func(path string)
}

// ServePTY serves the instrument on a pseudo-terminal until ctx ends. A Drop fault closes the
// pseudo-terminal and removes the link; after the drop a new one is opened, linked and announced.
func (s *Server) ServePTY(ctx context.Context, o PTYOptions) error {
	for {
		p, err := OpenPTY()
		if err != nil {
			return err
		}
		if o.Link != "" {
			if err := replaceLink(p.Path, o.Link); err != nil {
				p.Close()
				return err
			}
		}
		s.log.Info("serving", "device", p.Path, "link", o.Link)
		if o.Announce != nil {
			o.Announce(p.Path)
		}
		err = s.Serve(ctx, p.Conn())
		if o.Link != "" {
			removeLink(o.Link, p.Path)
		}
		p.Close()
		if again, err := s.afterServe(ctx, err); !again {
			return err
		}
	}
}

// afterServe decides what follows a Serve: after a drop, wait it out and go again.
func (s *Server) afterServe(ctx context.Context, err error) (again bool, _ error) {
	var drop *DropError
	if !errors.As(err, &drop) {
		if ctx.Err() != nil {
			return false, nil
		}
		return false, err
	}
	s.log.Warn("device gone", "for", drop.For)
	t := time.NewTimer(drop.For)
	defer t.Stop()
	select {
	case <-ctx.Done():
		return false, nil
	case <-t.C:
		return true, nil
	}
}

// replaceLink points link at target, atomically: a new link is renamed over the old one.
func replaceLink(target, link string) error {
	tmp := fmt.Sprintf("%s.%d.tmp", link, os.Getpid())
	_ = os.Remove(tmp)
	if err := os.Symlink(target, tmp); err != nil {
		return fmt.Errorf("link %s: %w", link, err)
	}
	if err := os.Rename(tmp, link); err != nil {
		_ = os.Remove(tmp)
		return fmt.Errorf("link %s: %w", link, err)
	}
	return nil
}

// removeLink removes link if it still points at target (a newer instance may have replaced it).
func removeLink(link, target string) {
	if got, err := os.Readlink(link); err == nil && got == target {
		_ = os.Remove(link)
	}
}

// ServePort serves the instrument on a named serial port (e.g. /dev/ttyUSB1, COM4) at baud until ctx ends. A
// Drop fault closes the port for its duration. The port paces itself, so the server's own pacing stays off.
func (s *Server) ServePort(ctx context.Context, device string, baud int) error {
	for {
		p, err := goserial.Open(device, &goserial.Mode{BaudRate: baud})
		if err != nil {
			return fmt.Errorf("serial port %s: %w", device, err)
		}
		s.log.Info("serving", "device", device, "baud", baud)
		err = s.Serve(ctx, &portConn{port: p})
		p.Close()
		if again, err := s.afterServe(ctx, err); !again {
			return err
		}
	}
}

// portConn gives a serial port read deadlines, by reading in short timeouts.
type portConn struct {
	port     goserial.Port
	mu       sync.Mutex
	deadline time.Time
}

func (c *portConn) Write(b []byte) (int, error) { return c.port.Write(b) }

func (c *portConn) SetReadDeadline(t time.Time) error {
	c.mu.Lock()
	defer c.mu.Unlock()
	c.deadline = t
	return nil
}

func (c *portConn) Read(b []byte) (int, error) {
	for {
		c.mu.Lock()
		dl := c.deadline
		c.mu.Unlock()
		step := 100 * time.Millisecond
		if !dl.IsZero() {
			left := time.Until(dl)
			if left <= 0 {
				return 0, os.ErrDeadlineExceeded
			}
			step = min(step, left)
		}
		if err := c.port.SetReadTimeout(step); err != nil {
			return 0, err
		}
		if n, err := c.port.Read(b); n > 0 || err != nil {
			return n, err
		}
	}
}
