package main

import (
	"context"
	"fmt"

	"goniod/client"
)

// scanOp runs one of the queue operations on a scan and prints the scan's new state.
func (a *app) scanOp(id, op string) error {
	c, err := a.connect()
	if err != nil {
		return err
	}
	defer c.Close()
	ops := map[string]func(context.Context, string) (client.Scan, error){
		"pause": c.Pause, "resume": c.Resume, "cancel": c.Cancel, "release": c.Release,
	}
	s, err := ops[op](a.ctx, id)
	if err != nil {
		return err
	}
	msg := fmt.Sprintf("%s %s", s.ID, s.State)
	if s.State == client.Running {
		msg += " (" + op + " takes effect after the current point)"
	}
	return a.printScan(s, msg)
}
