//go:build !unix

package main

import "os"

// fileTerminalSize is not asked of the console on other systems; $COLUMNS and $LINES apply.
func fileTerminalSize(*os.File) (cols, rows int, ok bool) { return 0, 0, false }
