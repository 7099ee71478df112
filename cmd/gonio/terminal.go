package main

import (
	"fmt"
	"io"
	"os"
	"strconv"
	"strings"
)

// screen redraws a block of text in place on a terminal: each redraw moves the cursor up over the previous
// block and clears it before writing the new one.
type screen struct {
	w     io.Writer
	tty   bool
	lines int
}

func (s *screen) redraw(text string) {
	if s.tty && s.lines > 0 {
		fmt.Fprintf(s.w, "\033[%dA\r\033[J", s.lines)
	}
	io.WriteString(s.w, text)
	s.lines = strings.Count(text, "\n")
}

// terminalSize returns the columns and rows of the terminal behind w, else of $COLUMNS/$LINES, else 80×24.
func terminalSize(w io.Writer) (cols, rows int) {
	cols, rows = 80, 24
	if f, ok := w.(*os.File); ok {
		if c, r, ok := fileTerminalSize(f); ok {
			return c, r
		}
	}
	if v, err := strconv.Atoi(os.Getenv("COLUMNS")); err == nil && v > 20 {
		cols = v
	}
	if v, err := strconv.Atoi(os.Getenv("LINES")); err == nil && v > 5 {
		rows = v
	}
	return cols, rows
}
