//go:build windows

package main

import (
	"context"
	"fmt"
	"io"

	"golang.org/x/sys/windows/svc"
)

// serviceName is the name to register goniod under with the Windows service manager (sc.exe create goniod …).
const serviceName = "goniod"

// runAsService runs goniod under the Windows service manager when that is what started it; ok is false when
// goniod runs from a console. Stop and shutdown requests end goniod as SIGTERM does elsewhere: the running
// scan stops after its point, high voltage goes off.
func runAsService(args []string, stderr io.Writer) (code int, ok bool) {
	is, err := svc.IsWindowsService()
	if err != nil || !is {
		return 0, false
	}
	s := &service{args: args, stderr: stderr}
	if err := svc.Run(serviceName, s); err != nil {
		fmt.Fprintln(stderr, "goniod: service:", err)
		return 1, true
	}
	return s.code, true
}

type service struct {
	args   []string
	stderr io.Writer
	code   int
}

// stopWaitHint tells the service manager how long a stop may take (a point to finish, high voltage off).
const stopWaitHint = 60_000 // milliseconds

// Execute is called by the service manager; it returns when goniod has stopped.
func (s *service) Execute(_ []string, req <-chan svc.ChangeRequest, status chan<- svc.Status) (bool, uint32) {
	status <- svc.Status{State: svc.StartPending}
	ctx, cancel := context.WithCancel(context.Background())
	defer cancel()
	done := make(chan int, 1)
	go func() { done <- serve(ctx, s.args, s.stderr) }()
	status <- svc.Status{State: svc.Running, Accepts: svc.AcceptStop | svc.AcceptShutdown}
	for {
		select {
		case c := <-req:
			switch c.Cmd {
			case svc.Interrogate:
				status <- c.CurrentStatus
			case svc.Stop, svc.Shutdown:
				status <- svc.Status{State: svc.StopPending, WaitHint: stopWaitHint}
				cancel()
			}
		case s.code = <-done:
			status <- svc.Status{State: svc.Stopped}
			return false, uint32(s.code)
		}
	}
}
