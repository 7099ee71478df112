package main

import (
	"bufio"
	"context"
	"errors"
	"fmt"
	"io"
	"net"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"sync"
	"sync/atomic"
	"time"

	"google.golang.org/grpc"
	"google.golang.org/protobuf/encoding/protodelim"
	"google.golang.org/protobuf/proto"
	"google.golang.org/protobuf/types/known/timestamppb"

	goniodv1 "goniod/proto/goniod/v1"
)

// The bare server: the bench program started again with -bare-server, in its own process like goniod. It
// serves only WatchScan, from a plain grpc.NewServer() without options or interceptors, with the points of a
// file (the first points of a goniod scan, as goniod sent them). It is what gRPC alone does with goniod's
// messages on this machine, the baseline of the streaming and fan-out figures. Two kinds of watch:
//
//   - "stream/N": a record, then N points (the file's, round and round) as fast as the stream takes them,
//     each in a new ScanEvent as goniod sends them, then an end record;
//   - "fanout/W/N/INTERVAL" (nanoseconds): once W watches of that name are open, one point every INTERVAL, N in all: the
//     server writes a line to a file and fsyncs it, stamps the point with the time before the write, wakes
//     every watch, and each sends the point; then an end record. This is the least a durable fan-out does.
type bareServer struct {
	goniodv1.UnimplementedScansServer
	points []*goniodv1.Point
	dir    string

	mu     sync.Mutex
	rounds map[string]*broadcast
}

func (s *bareServer) WatchScan(req *goniodv1.WatchScanRequest, st grpc.ServerStreamingServer[goniodv1.ScanEvent]) error {
	rec := &goniodv1.Scan{Id: req.GetId(), State: goniodv1.ScanState_SCAN_STATE_RUNNING}
	if err := st.Send(&goniodv1.ScanEvent{Event: &goniodv1.ScanEvent_State{State: rec}}); err != nil {
		return err
	}
	var total int
	if _, err := fmt.Sscanf(req.GetId(), "stream/%d", &total); err == nil {
		for i := range total {
			if err := st.Send(&goniodv1.ScanEvent{Event: &goniodv1.ScanEvent_Point{Point: s.points[i%len(s.points)]}}); err != nil {
				return err
			}
		}
	} else if err := s.fanOut(st, req.GetId()); err != nil {
		return err
	}
	end := &goniodv1.Scan{Id: req.GetId(), State: goniodv1.ScanState_SCAN_STATE_DONE}
	return st.Send(&goniodv1.ScanEvent{Event: &goniodv1.ScanEvent_State{State: end}, End: true})
}

// fanOut follows the round named id, joining it, and sends its points as they come.
func (s *bareServer) fanOut(st grpc.ServerStreamingServer[goniodv1.ScanEvent], id string) error {
	var watchers, points int
	var interval time.Duration
	if _, err := fmt.Sscanf(id, "fanout/%d/%d/%d", &watchers, &points, &interval); err != nil || watchers < 1 || points < 1 {
		return fmt.Errorf("watch %q: want fanout/WATCHERS/POINTS/INTERVAL-NS (%v)", id, err)
	}
	s.mu.Lock()
	b := s.rounds[id]
	if b == nil {
		b = newBroadcast(points)
		s.rounds[id] = b
	}
	b.joined++
	if b.joined == watchers {
		go b.run(s.points, interval, filepath.Join(s.dir, "bare-fanout.log"))
	}
	s.mu.Unlock()
	for cursor := 0; ; {
		pts, done, changed := b.view(cursor)
		for _, p := range pts {
			if err := st.Send(&goniodv1.ScanEvent{Event: &goniodv1.ScanEvent_Point{Point: p}}); err != nil {
				return err
			}
		}
		cursor += len(pts)
		if done && len(pts) == 0 {
			return nil
		}
		if len(pts) > 0 {
			continue
		}
		select {
		case <-st.Context().Done():
			return st.Context().Err()
		case <-changed:
		}
	}
}

// broadcast is one fan-out round: the points published so far, read without a lock, and a channel closed
// at each publication (the channel is read before the count, so no publication is missed).
type broadcast struct {
	joined  int // guarded by bareServer.mu
	points  []*goniodv1.Point
	count   atomic.Int64
	done    atomic.Bool
	changed atomic.Pointer[chan struct{}]
}

func newBroadcast(n int) *broadcast {
	b := &broadcast{points: make([]*goniodv1.Point, n)}
	ch := make(chan struct{})
	b.changed.Store(&ch)
	return b
}

// run publishes the round's points at a steady interval, each made durable first, and ends the round.
func (b *broadcast) run(sample []*goniodv1.Point, interval time.Duration, path string) {
	defer b.end()
	f, err := os.Create(path)
	if err != nil {
		fmt.Fprintln(os.Stderr, "bare server:", err)
		return
	}
	defer f.Close()
	start := time.Now()
	for i := range b.points {
		time.Sleep(time.Until(start.Add(time.Duration(i+1) * interval)))
		taken := time.Now()
		p := proto.Clone(sample[i%len(sample)]).(*goniodv1.Point)
		p.Index, p.Time = uint32(i), timestamppb.New(taken)
		if _, err := fmt.Fprintf(f, "%d\n", i); err == nil {
			err = f.Sync()
		}
		if err != nil {
			fmt.Fprintln(os.Stderr, "bare server:", err)
		}
		b.points[i] = p
		b.count.Add(1)
		b.wake()
	}
}

func (b *broadcast) end() {
	b.done.Store(true)
	b.wake()
}

func (b *broadcast) wake() {
	ch := make(chan struct{})
	close(*b.changed.Swap(&ch))
}

func (b *broadcast) view(cursor int) ([]*goniodv1.Point, bool, <-chan struct{}) {
	ch := *b.changed.Load()
	done := b.done.Load()
	return b.points[cursor:b.count.Load()], done, ch
}

// serveBare runs the bare server until its standard input closes (the bench program ended), after printing
// its address on standard output.
func serveBare(pointsFile string) error {
	points, err := loadPoints(pointsFile)
	if err != nil {
		return err
	}
	lis, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		return err
	}
	gs := grpc.NewServer()
	goniodv1.RegisterScansServer(gs, &bareServer{points: points, dir: filepath.Dir(pointsFile), rounds: map[string]*broadcast{}})
	go func() {
		_, _ = io.Copy(io.Discard, os.Stdin)
		gs.Stop()
	}()
	fmt.Println(lis.Addr().String())
	return gs.Serve(lis)
}

func loadPoints(path string) ([]*goniodv1.Point, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	r := bufio.NewReader(f)
	var points []*goniodv1.Point
	for {
		p := &goniodv1.Point{}
		err := protodelim.UnmarshalFrom(r, p)
		if errors.Is(err, io.EOF) {
			break
		}
		if err != nil {
			return nil, fmt.Errorf("points file: %w", err)
		}
		points = append(points, p)
	}
	if len(points) == 0 {
		return nil, errors.New("points file: no points")
	}
	return points, nil
}

// bareProcess is a running bare server.
type bareProcess struct {
	cmd   *exec.Cmd
	stdin io.Closer
	Addr  string
}

// startBare saves the first sample points of a goniod scan to dir and starts the bare server on them.
func startBare(ctx context.Context, scans goniodv1.ScansClient, id, dir string, sample int) (*bareProcess, error) {
	path := filepath.Join(dir, "bare-points.bin")
	if err := savePoints(ctx, scans, id, sample, path); err != nil {
		return nil, err
	}
	self, err := os.Executable()
	if err != nil {
		return nil, err
	}
	cmd := exec.Command(self, "-bare-server", path)
	stdin, err := cmd.StdinPipe()
	if err != nil {
		return nil, err
	}
	stdout, err := cmd.StdoutPipe()
	if err != nil {
		return nil, err
	}
	cmd.Stderr = os.Stderr
	if err := cmd.Start(); err != nil {
		return nil, err
	}
	line, err := bufio.NewReader(stdout).ReadString('\n')
	if err != nil {
		stdin.Close()
		_ = cmd.Wait()
		return nil, fmt.Errorf("bare server did not start: %w", err)
	}
	return &bareProcess{cmd: cmd, stdin: stdin, Addr: strings.TrimSpace(line)}, nil
}

// savePoints writes the first n points of a scan, read through goniod, to a file.
func savePoints(ctx context.Context, scans goniodv1.ScansClient, id string, n int, path string) error {
	f, err := os.Create(path)
	if err != nil {
		return err
	}
	defer f.Close()
	w := bufio.NewWriter(f)
	st, err := scans.ReadPoints(ctx, &goniodv1.ReadPointsRequest{Id: id, Limit: uint32(n)})
	if err != nil {
		return err
	}
	for {
		p, err := st.Recv()
		if errors.Is(err, io.EOF) {
			break
		}
		if err != nil {
			return err
		}
		if _, err := protodelim.MarshalTo(w, p); err != nil {
			return err
		}
	}
	if err := w.Flush(); err != nil {
		return err
	}
	return f.Close()
}

func (b *bareProcess) stop() error {
	b.stdin.Close()
	return b.cmd.Wait()
}
