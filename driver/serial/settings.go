package serial

import (
	"errors"
	"fmt"
	"strings"
	"time"

	goserial "go.bug.st/serial"
)

// Settings are the serial driver's part of the daemon configuration (`drivers: {serial: {...}}`). Only the
// device is required.
type Settings struct {
	// Device is the serial port: /dev/ttyUSB0, /dev/serial/by-id/..., COM3.
	Device string `yaml:"device"`
	// Baud rate (default 115200), data bits (5–8, default 8), parity (none, odd, even, mark, space; default
	// none), stop bits (1, 1.5 or 2; default 1).
	Baud     int     `yaml:"baud"`
	DataBits int     `yaml:"data_bits"`
	Parity   string  `yaml:"parity"`
	StopBits float64 `yaml:"stop_bits"`
	// LineEnding overrides the profile's command ending: lf, crlf or cr (or "\n", "\r\n", "\r").
	LineEnding string `yaml:"line_ending"`
	// ReadTimeout overrides the profile's reply timeout for commands that take no instrument time.
	ReadTimeout time.Duration `yaml:"read_timeout"`
	// Profile is the protocol profile file; empty: the built-in goniod protocol.
	Profile string `yaml:"profile"`
	// Failures is how many exchanges in a row may fail (time out, or bring a garbled reply) before the link
	// is declared down (default 3). Retries is how often an idempotent operation is retried (default 2).
	Failures int  `yaml:"failures"`
	Retries  *int `yaml:"retries"`
	// Keepalive overrides the profile's keepalive period.
	Keepalive time.Duration `yaml:"keepalive"`
	// ReconnectMax is the longest wait between reconnection attempts while the link is down (default 2s); the
	// waits start at 100 ms and double.
	ReconnectMax time.Duration `yaml:"reconnect_max"`
}

// Defaults of the settings.
const (
	defaultBaud         = 115200
	defaultFailures     = 3
	defaultRetries      = 2
	defaultKeepalive    = 3 * time.Second
	defaultReconnectMax = 2 * time.Second
	firstReconnectWait  = 100 * time.Millisecond
)

// check fills in defaults and names the first bad setting with its allowed range.
func (s *Settings) check() error {
	if strings.TrimSpace(s.Device) == "" {
		return errors.New("drivers.serial.device: required (e.g. /dev/ttyUSB0, /dev/serial/by-id/..., COM3)")
	}
	if s.Baud == 0 {
		s.Baud = defaultBaud
	}
	if s.DataBits == 0 {
		s.DataBits = 8
	}
	if s.StopBits == 0 {
		s.StopBits = 1
	}
	if s.Failures == 0 {
		s.Failures = defaultFailures
	}
	if s.Retries == nil {
		r := defaultRetries
		s.Retries = &r
	}
	if s.ReconnectMax == 0 {
		s.ReconnectMax = defaultReconnectMax
	}
	if _, err := s.parity(); err != nil {
		return err
	}
	if _, err := s.lineEnding(); err != nil {
		return err
	}
	switch {
	case s.Baud < 50 || s.Baud > 4_000_000:
		return fmt.Errorf("drivers.serial.baud = %d: must be within [50, 4000000]", s.Baud)
	case s.DataBits < 5 || s.DataBits > 8:
		return fmt.Errorf("drivers.serial.data_bits = %d: must be 5, 6, 7 or 8", s.DataBits)
	case s.StopBits != 1 && s.StopBits != 1.5 && s.StopBits != 2:
		return fmt.Errorf("drivers.serial.stop_bits = %g: must be 1, 1.5 or 2", s.StopBits)
	case s.ReadTimeout != 0 && (s.ReadTimeout < 10*time.Millisecond || s.ReadTimeout > time.Minute):
		return fmt.Errorf("drivers.serial.read_timeout = %v: must be within [10ms, 1m]", s.ReadTimeout)
	case s.Failures < 1 || s.Failures > 100:
		return fmt.Errorf("drivers.serial.failures = %d: must be within [1, 100]", s.Failures)
	case *s.Retries < 0 || *s.Retries > 5:
		return fmt.Errorf("drivers.serial.retries = %d: must be within [0, 5]", *s.Retries)
	case s.Keepalive != 0 && (s.Keepalive < 100*time.Millisecond || s.Keepalive > time.Hour):
		return fmt.Errorf("drivers.serial.keepalive = %v: must be within [100ms, 1h]", s.Keepalive)
	case s.ReconnectMax < firstReconnectWait || s.ReconnectMax > time.Minute:
		return fmt.Errorf("drivers.serial.reconnect_max = %v: must be within [100ms, 1m]", s.ReconnectMax)
	}
	return nil
}

func (s *Settings) parity() (goserial.Parity, error) {
	switch strings.ToLower(s.Parity) {
	case "", "none":
		return goserial.NoParity, nil
	case "odd":
		return goserial.OddParity, nil
	case "even":
		return goserial.EvenParity, nil
	case "mark":
		return goserial.MarkParity, nil
	case "space":
		return goserial.SpaceParity, nil
	}
	return 0, fmt.Errorf("drivers.serial.parity = %q: use none, odd, even, mark or space", s.Parity)
}

// lineEnding is the command ending the settings ask for, or "" for the profile's.
func (s *Settings) lineEnding() (string, error) {
	switch strings.ToLower(s.LineEnding) {
	case "":
		return "", nil
	case "lf", "\n":
		return "\n", nil
	case "crlf", "\r\n":
		return "\r\n", nil
	case "cr", "\r":
		return "\r", nil
	}
	return "", fmt.Errorf("drivers.serial.line_ending = %q: use lf, crlf or cr", s.LineEnding)
}

// mode is the port configuration for go.bug.st/serial. Modem lines are left alone: a pseudo-terminal has
// none, and the ioctls that set them fail on it.
func (s *Settings) mode() *goserial.Mode {
	par, _ := s.parity()
	stop := goserial.OneStopBit
	switch s.StopBits {
	case 1.5:
		stop = goserial.OnePointFiveStopBits
	case 2:
		stop = goserial.TwoStopBits
	}
	return &goserial.Mode{BaudRate: s.Baud, DataBits: s.DataBits, Parity: par, StopBits: stop}
}
