package main

import (
	"context"
	"fmt"
	"time"

	"google.golang.org/grpc"
	"google.golang.org/grpc/credentials/insecure"

	goniodv1 "goniod/proto/goniod/v1"
)

// streamRate receives one whole watch stream and returns its points per second, from the request to the
// end event. The client is the generated stub, the same for goniod and the bare server.
func streamRate(ctx context.Context, conn grpc.ClientConnInterface, id string, want int) (float64, error) {
	scans := goniodv1.NewScansClient(conn)
	ctx, cancel := context.WithCancel(ctx)
	defer cancel()
	t0 := time.Now()
	st, err := scans.WatchScan(ctx, &goniodv1.WatchScanRequest{Id: id})
	if err != nil {
		return 0, err
	}
	n := 0
	for {
		ev, err := st.Recv()
		if err != nil {
			return 0, fmt.Errorf("watch %s after %d points: %w", id, n, err)
		}
		if ev.GetPoint() != nil {
			n++
		}
		if ev.GetEnd() {
			break
		}
	}
	took := time.Since(t0)
	if n != want {
		return 0, fmt.Errorf("watch %s: %d points, want %d", id, n, want)
	}
	return float64(n) / took.Seconds(), nil
}

// streamComparison is the best of rounds alternating watches of a stored goniod scan and of the bare server:
// points per second, and the server process's processor time per point.
type streamComparison struct {
	Goniod, Bare       float64
	GoniodCPU, BareCPU time.Duration
}

// timedStream is streamRate with the processor time the server process spent meanwhile, per point.
func timedStream(ctx context.Context, conn grpc.ClientConnInterface, pid int, id string, want int) (float64, time.Duration, error) {
	before, err := processCPU(pid)
	if err != nil {
		return 0, 0, err
	}
	rate, err := streamRate(ctx, conn, id, want)
	if err != nil {
		return 0, 0, err
	}
	after, err := processCPU(pid)
	return rate, (after - before) / time.Duration(want), err
}

// compareStreaming alternates rounds of watching a stored goniod scan of n points and the bare server's stream
// of as many of the same points.
func compareStreaming(ctx context.Context, d *daemon, bare *bareProcess, id string, n, rounds int) (streamComparison, error) {
	c := streamComparison{GoniodCPU: time.Hour, BareCPU: time.Hour}
	conn, err := grpc.NewClient(bare.Addr, grpc.WithTransportCredentials(insecure.NewCredentials()))
	if err != nil {
		return c, err
	}
	defer conn.Close()
	for range rounds {
		g, gcpu, err := timedStream(ctx, d.Client.Conn(), d.cmd.Process.Pid, id, n)
		if err != nil {
			return c, fmt.Errorf("goniod: %w", err)
		}
		b, bcpu, err := timedStream(ctx, conn, bare.cmd.Process.Pid, fmt.Sprintf("stream/%d", n), n)
		if err != nil {
			return c, fmt.Errorf("bare server: %w", err)
		}
		c.Goniod, c.Bare = max(c.Goniod, g), max(c.Bare, b)
		c.GoniodCPU, c.BareCPU = min(c.GoniodCPU, gcpu), min(c.BareCPU, bcpu)
	}
	return c, nil
}
