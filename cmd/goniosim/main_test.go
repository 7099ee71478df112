//go:build linux

package main

import (
	"bufio"
	"bytes"
	"context"
	"io"
	"os"
	"path/filepath"
	"strings"
	"sync"
	"testing"
	"time"

	goserial "go.bug.st/serial"
)

// lockedBuffer is stderr shared with the running goniosim.
type lockedBuffer struct {
	mu sync.Mutex
	b  bytes.Buffer
}

func (l *lockedBuffer) Write(p []byte) (int, error) {
	l.mu.Lock()
	defer l.mu.Unlock()
	return l.b.Write(p)
}

func (l *lockedBuffer) String() string {
	l.mu.Lock()
	defer l.mu.Unlock()
	return l.b.String()
}

// goniosim runs goniosim in-process with args; it returns the lines it prints, its control input and a
// func that stops it and returns its exit code.
func goniosim(t *testing.T, args ...string) (lines <-chan string, control io.Writer, stop func() int, stderr *lockedBuffer) {
	t.Helper()
	outR, outW := io.Pipe()
	inR, inW := io.Pipe()
	stderr = &lockedBuffer{}
	ctx, cancel := context.WithCancel(context.Background())
	code := make(chan int, 1)
	go func() { code <- run(ctx, args, inR, outW, stderr); outW.Close() }()
	ch := make(chan string, 8)
	go func() {
		defer close(ch)
		sc := bufio.NewScanner(outR)
		for sc.Scan() {
			ch <- sc.Text()
		}
	}()
	var once sync.Once
	var rc int
	stop = func() int {
		once.Do(func() {
			cancel()
			inW.Close()
			rc = <-code
		})
		return rc
	}
	t.Cleanup(func() { stop() })
	return ch, inW, stop, stderr
}

func next(t *testing.T, lines <-chan string) string {
	t.Helper()
	select {
	case l := <-lines:
		return l
	case <-time.After(5 * time.Second):
		t.Fatal("goniosim printed no line in 5 s")
		return ""
	}
}

// ask sends a command on an open port and reads one reply line.
func ask(t *testing.T, p goserial.Port, cmd string) string {
	t.Helper()
	if _, err := p.Write([]byte(cmd + "\n")); err != nil {
		t.Fatal(err)
	}
	var got []byte
	buf := make([]byte, 128)
	deadline := time.Now().Add(3 * time.Second)
	for !bytes.Contains(got, []byte("\n")) {
		if time.Now().After(deadline) {
			t.Fatalf("%s: no reply (got %q)", cmd, got)
		}
		_ = p.SetReadTimeout(50 * time.Millisecond)
		n, err := p.Read(buf)
		if err != nil {
			t.Fatalf("%s: %v", cmd, err)
		}
		got = append(got, buf[:n]...)
	}
	return strings.TrimSuffix(string(got), "\n")
}

func open(t *testing.T, path string) goserial.Port {
	t.Helper()
	p, err := goserial.Open(path, &goserial.Mode{BaudRate: 115200})
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { p.Close() })
	return p
}

// TestGoniosim: the first line is the device; it answers the protocol with the instrument the flags chose;
// faults from standard input and from --fault act; it exits cleanly and removes its link.
func TestGoniosim(t *testing.T) {
	link := filepath.Join(t.TempDir(), "tty")
	lines, control, stop, stderr := goniosim(t, "--anode", "Mo", "--crystal", "si111", "--seed", "7", "--speed", "100",
		"--twotheta-offset", "0.3", "--link", link, "--fault", "#3 garble")
	dev := next(t, lines)
	if !strings.HasPrefix(dev, "/dev/pts/") {
		t.Fatalf("first line %q, want the pseudo-terminal's path", dev)
	}
	if got, _ := os.Readlink(link); got != dev {
		t.Errorf("link -> %q, want %s", got, dev)
	}
	p := open(t, link)
	if got := ask(t, p, "*IDN?"); got != "goniod,simulated spectrometer,Mo-Si(111),seed 7" {
		t.Errorf("*IDN? = %q", got)
	}
	if got := ask(t, p, "SYST:DESC?"); !strings.HasPrefix(got, "Mo,Si(111),") {
		t.Errorf("SYST:DESC? = %q", got)
	}
	if got := ask(t, p, "SYST:ECHO? 3"); got == "3" {
		t.Error("the third reply was not garbled (--fault \"#3 garble\")")
	}
	if _, err := io.WriteString(control, "door=open\n"); err != nil {
		t.Fatal(err)
	}
	deadline := time.Now().Add(3 * time.Second)
	for ask(t, p, "INT?") != "0" {
		if time.Now().After(deadline) {
			t.Fatal("door=open on standard input did not open the interlock")
		}
		time.Sleep(20 * time.Millisecond)
	}
	_, _ = io.WriteString(control, "explode\n")
	_, _ = io.WriteString(control, "drop=200ms\n")
	again := next(t, lines)
	if !strings.HasPrefix(again, "/dev/pts/") {
		t.Fatalf("after a drop goniosim printed %q, want the new device", again)
	}
	p2 := open(t, link)
	if got := ask(t, p2, "SYST:ECHO? 5"); got != "5" {
		t.Errorf("on the new device: %q", got)
	}
	if rc := stop(); rc != 0 {
		t.Errorf("exit code %d; stderr:\n%s", rc, stderr)
	}
	if _, err := os.Lstat(link); !os.IsNotExist(err) {
		t.Errorf("link left behind after a clean exit: %v", err)
	}
	if log := stderr.String(); !strings.Contains(log, "not a fault") || !strings.Contains(log, "fault injected") {
		t.Errorf("log does not show the refused and the injected faults:\n%s", log)
	}
}

func TestGoniosimBadFlags(t *testing.T) {
	for _, args := range [][]string{{"--anode", "Xx"}, {"--fault", "explode"}, {"--speed", "-1"}, {"--baud", "-1"},
		{"--port", "/dev/null", "--link", "/tmp/x"}, {"extra"}} {
		var stderr bytes.Buffer
		if rc := run(context.Background(), args, strings.NewReader(""), io.Discard, &stderr); rc != 2 || stderr.Len() == 0 {
			t.Errorf("goniosim %v: exit %d, stderr %q; want 2 and a message", args, rc, stderr.String())
		}
	}
}
