//go:build !windows

package main

import "io"

// runAsService is for the Windows service manager only; elsewhere goniod runs under systemd or a shell.
func runAsService([]string, io.Writer) (int, bool) { return 0, false }
