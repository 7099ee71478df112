package engine_test

import (
	"context"
	"errors"
	"strings"
	"testing"
	"time"

	"goniod/client"
	"goniod/daemon/server/servertest"
	"goniod/sim"
)

// An interlock that opens mid-scan pauses the scan between points with high voltage off and the point in
// progress discarded; closing the enclosure and resuming finishes it without a gap or a repeat.
func TestInterlockPausesTheScan(t *testing.T) {
	inst, err := sim.New(sim.Config{Seed: 3, Speed: 20}, nil)
	if err != nil {
		t.Fatal(err)
	}
	defer inst.Close()
	d := servertest.StartOn(t, inst)
	ctx := context.Background()
	s, err := d.Client.Submit(ctx, slowScan(30))
	if err != nil {
		t.Fatal(err)
	}
	waitScanPoints(t, d, s.ID, 3)
	inst.SetDoor(true)
	paused := waitScanState(t, d, s.ID, client.Paused)
	if !strings.Contains(paused.Reason, "interlock") || highVoltage(t, d) {
		t.Fatalf("paused with %q, high voltage %v", paused.Reason, highVoltage(t, d))
	}
	checkContiguous(t, readPoints(t, d, s.ID), paused.PointsDone)
	if _, err := d.Client.Resume(ctx, s.ID); err != nil {
		t.Fatal(err)
	}
	if again := waitScanState(t, d, s.ID, client.Paused); again.PointsDone != paused.PointsDone {
		t.Fatalf("with the door open the resumed scan took points: %d, then %d", paused.PointsDone, again.PointsDone)
	}
	inst.SetDoor(false)
	if _, err := d.Client.Resume(ctx, s.ID); err != nil {
		t.Fatal(err)
	}
	if final, _ := d.WaitEnd(t, s.ID); final.State != client.Done {
		t.Fatalf("ended %s: %s", final.State, final.Reason)
	}
	checkContiguous(t, readPoints(t, d, s.ID), 30)
}

// An alignment that the interlock stops fails with the reason, leaves its scan cancelled rather than paused
// (it would hold the queue), and the queue goes on.
func TestAlignStoppedByTheInterlock(t *testing.T) {
	inst, err := sim.New(sim.Config{Seed: 3, Speed: 10000}, nil)
	if err != nil {
		t.Fatal(err)
	}
	defer inst.Close()
	d := servertest.StartOn(t, inst)
	ctx := context.Background()
	inst.SetDoor(true)
	_, err = d.Client.Align(ctx, client.AlignOptions{Source: &client.Source{KV: 30, MA: 1}})
	if err == nil || !strings.Contains(err.Error(), "interlock") {
		t.Fatalf("alignment with the door open: %v, want a failure naming the interlock", err)
	}
	scans, _, err := d.Client.List(ctx, client.ListOptions{})
	if err != nil || len(scans) != 1 || scans[0].State != client.Cancelled {
		t.Fatalf("alignment scans after the failure: %+v (%v), want one cancelled", scans, err)
	}
	inst.SetDoor(false)
	s, err := d.Client.Submit(ctx, client.ScanRequest{Kind: client.Timed, Points: 3, Dwell: time.Second})
	if err != nil {
		t.Fatal(err)
	}
	if final, _ := d.WaitEnd(t, s.ID); final.State != client.Done {
		t.Fatalf("the scan after a failed alignment ended %s: %s", final.State, final.Reason)
	}
	if _, err := d.Client.Resume(ctx, scans[0].ID); !errors.Is(err, client.ErrRefused) {
		t.Errorf("resume of a cancelled alignment scan: %v", err)
	}
}
