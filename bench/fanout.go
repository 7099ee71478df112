package main

import (
	"context"
	"errors"
	"fmt"
	"sync"
	"sync/atomic"
	"time"

	"google.golang.org/grpc"
	"google.golang.org/grpc/credentials/insecure"

	"goniod/client"
	goniodv1 "goniod/proto/goniod/v1"
)

// fanOutFigures: the time from a point being taken (its timestamp, set before its fsync) to its arrival at
// each watcher, over gRPC on loopback, for goniod and for the bare server doing the least a durable fan-out
// must (see bareServer).
type fanOutFigures struct {
	Watchers, Points int
	Interval         time.Duration // goniod's wall time per point
	Goniod, Bare     latency
}

// latency is a distribution's median and 99th percentile, and its number of samples.
type latency struct {
	P50, P99 time.Duration
	Samples  int
}

func latencyOf(ds []time.Duration) latency {
	return latency{P50: quantile(ds, 0.5), P99: quantile(ds, 0.99), Samples: len(ds)}
}

// compareFanOut runs a timed scan of points with high voltage on, one point per interval of wall time
// (simDwell at the daemon's simulator speed), watched by watchers streams spread over conns connections; then
// the bare server's fan-out of as many of the scan's points at the same interval to as many watchers.
func compareFanOut(ctx context.Context, d *daemon, bareOf func(id string) (*bareProcess, error), watchers, conns, points int,
	simDwell, interval time.Duration) (fanOutFigures, error) {
	f := fanOutFigures{Watchers: watchers, Points: points}
	s, err := d.Client.Submit(ctx, client.ScanRequest{Kind: client.Timed, Points: points, Dwell: simDwell,
		Source: &client.Source{KV: 30, MA: 0.8}, Label: "bench fan-out"})
	if err != nil {
		return f, err
	}
	lat, err := fanOut(ctx, d.Addr, s.ID, watchers, conns, points)
	if err != nil {
		return f, fmt.Errorf("goniod: %w", err)
	}
	final, err := d.Client.Scan(ctx, s.ID)
	if err != nil {
		return f, err
	}
	if final.State != client.Done {
		return f, fmt.Errorf("fan-out scan ended %s: %s", final.State, final.Reason)
	}
	f.Interval, f.Goniod = final.Ended.Sub(final.Started)/time.Duration(points), latencyOf(lat)
	bare, err := bareOf(s.ID)
	if err != nil {
		return f, err
	}
	lat, err = fanOut(ctx, bare.Addr, fmt.Sprintf("fanout/%d/%d/%d", watchers, points, interval.Nanoseconds()), watchers, conns, points)
	if err != nil {
		return f, fmt.Errorf("bare server: %w", err)
	}
	f.Bare = latencyOf(lat)
	return f, nil
}

// fanOut follows one scan with watchers streams over conns connections to addr and returns, for every point
// taken after all of them had their stream open, the time from its timestamp to its arrival at each watcher.
// Every watcher must get every point, in order.
func fanOut(ctx context.Context, addr, id string, watchers, conns, points int) ([]time.Duration, error) {
	stubs := make([]goniodv1.ScansClient, conns)
	for i := range stubs {
		conn, err := grpc.NewClient(addr, grpc.WithTransportCredentials(insecure.NewCredentials()))
		if err != nil {
			return nil, err
		}
		defer conn.Close()
		stubs[i] = goniodv1.NewScansClient(conn)
	}
	ctx, cancel := context.WithCancel(ctx)
	defer cancel()
	var attached sync.WaitGroup
	var from atomic.Int64 // points taken before this (Unix ns) do not count; the largest int64 until all attached
	from.Store(1<<63 - 1)
	lat := make([][]time.Duration, watchers)
	errs := make(chan error, watchers)
	attached.Add(watchers)
	for w := range watchers {
		go func() {
			lat[w] = make([]time.Duration, 0, points)
			errs <- follow(ctx, stubs[w%conns], id, points, attached.Done, func(p *goniodv1.Point) {
				now := time.Now()
				if taken := p.GetTime().AsTime(); taken.UnixNano() >= from.Load() {
					lat[w] = append(lat[w], now.Sub(taken))
				}
			})
		}()
	}
	attached.Wait()
	from.Store(time.Now().UnixNano())
	for range watchers {
		if err := <-errs; err != nil {
			return nil, err
		}
	}
	var all []time.Duration
	for _, l := range lat {
		all = append(all, l...)
	}
	if len(all) == 0 {
		return nil, errors.New("no point was taken after the watchers attached")
	}
	return all, nil
}

// follow watches a scan from point 0 to its end with the generated stub: it calls attached (if not nil) once
// the stream answers, point (if not nil) for each point, and checks that points 0 to want-1 came, each once
// and in order.
func follow(ctx context.Context, scans goniodv1.ScansClient, id string, want int, attached func(), point func(*goniodv1.Point)) error {
	if attached == nil {
		attached = func() {}
	}
	st, err := scans.WatchScan(ctx, &goniodv1.WatchScanRequest{Id: id})
	if err != nil {
		attached()
		return err
	}
	first, next := true, 0
	for {
		ev, err := st.Recv()
		if first {
			attached()
			first = false
		}
		if err != nil {
			return fmt.Errorf("watch %s after %d points: %w", id, next, err)
		}
		if p := ev.GetPoint(); p != nil {
			if int(p.Index) != next {
				return fmt.Errorf("watch %s: point %d where %d was due", id, p.Index, next)
			}
			next++
			if point != nil {
				point(p)
			}
		}
		if ev.GetEnd() {
			if next != want {
				return fmt.Errorf("watch %s ended after %d points of %d", id, next, want)
			}
			return nil
		}
	}
}
