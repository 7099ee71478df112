package drivertest

import (
	"bufio"
	"bytes"
	"fmt"
	"io"
	"strconv"
	"strings"
)

// Transcript is a recorded conversation on a line-oriented serial link: what the host sent, and what the
// device answered. Its text form, one entry a line:
//
//	# a comment; blank lines are ignored too
//	> MOVE THET,10                 the host sends this line (compared without its terminator)
//	< 10                           the device answers this line (LF appended)
//	<q "\x00\xffgarbage\n"         the device sends these bytes exactly (a Go string literal)
//	<!                             the device sends nothing: the host's read times out
//	!close                         the device vanishes: every later read and write fails
//
// Every "<", "<q", "<!" and "!close" belongs to the "> " line above it.
type Transcript struct {
	Name  string
	Steps []Step
}

// Step is one command and what the device did about it.
type Step struct {
	Line  int    // line of the "> " entry in the transcript
	Send  string // the command line, without terminator
	Reply []byte // bytes the device sends in answer (may be empty)
	Close bool   // the device vanishes after the reply
}

// ParseTranscript reads a transcript; name is used in errors.
func ParseTranscript(name string, r io.Reader) (*Transcript, error) {
	t := &Transcript{Name: name}
	sc := bufio.NewScanner(r)
	for n := 1; sc.Scan(); n++ {
		line := strings.TrimRight(sc.Text(), "\r")
		if strings.TrimSpace(line) == "" || strings.HasPrefix(line, "#") {
			continue
		}
		if strings.HasPrefix(line, "> ") || line == ">" {
			t.Steps = append(t.Steps, Step{Line: n, Send: strings.TrimPrefix(strings.TrimPrefix(line, ">"), " ")})
			continue
		}
		if len(t.Steps) == 0 {
			return nil, fmt.Errorf("%s:%d: %q before the first \"> \" command", name, n, line)
		}
		st := &t.Steps[len(t.Steps)-1]
		switch {
		case line == "<!":
		case line == "!close":
			st.Close = true
		case strings.HasPrefix(line, "<q "):
			b, err := strconv.Unquote(strings.TrimSpace(line[3:]))
			if err != nil {
				return nil, fmt.Errorf("%s:%d: <q wants a Go string literal: %v", name, n, err)
			}
			st.Reply = append(st.Reply, b...)
		case strings.HasPrefix(line, "< ") || line == "<":
			st.Reply = append(st.Reply, strings.TrimPrefix(strings.TrimPrefix(line, "<"), " ")+"\n"...)
		default:
			return nil, fmt.Errorf("%s:%d: %q: want \"> \", \"< \", \"<q \", \"<!\" or \"!close\"", name, n, line)
		}
	}
	return t, sc.Err()
}

// Format writes the transcript in its text form.
func (t *Transcript) Format(w io.Writer) error {
	var b bytes.Buffer
	for _, st := range t.Steps {
		fmt.Fprintf(&b, "> %s\n", st.Send)
		if len(st.Reply) == 0 && !st.Close {
			b.WriteString("<!\n")
		}
		for rest := st.Reply; len(rest) > 0; {
			line, tail, ok := bytes.Cut(rest, []byte("\n"))
			if ok && printable(line) {
				fmt.Fprintf(&b, "< %s\n", line)
			} else {
				if ok {
					line = append(line[:len(line):len(line)], '\n')
				}
				fmt.Fprintf(&b, "<q %q\n", line)
			}
			rest = tail
		}
		if st.Close {
			b.WriteString("!close\n")
		}
	}
	_, err := w.Write(b.Bytes())
	return err
}

// printable reports whether a reply line can be written as "< text": printable ASCII, no leading space.
func printable(line []byte) bool {
	if len(line) > 0 && line[0] == ' ' {
		return false
	}
	for _, c := range line {
		if c < 0x20 || c > 0x7e {
			return false
		}
	}
	return true
}
