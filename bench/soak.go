package main

import (
	"context"
	"errors"
	"fmt"
	"io"
	"math/rand/v2"
	"sync"
	"sync/atomic"
	"time"

	"goniod/client"
	goniodv1 "goniod/proto/goniod/v1"
)

// soakOptions shape the load soak.
type soakOptions struct {
	Duration                      time.Duration
	Watchers, Submitters, Pollers int
	// WatchConns is how many connections the watchers share.
	WatchConns int
	// SimDwell is the dwell of the soak's scans in simulated time; MaxPoints the longest scan.
	SimDwell  time.Duration
	MaxPoints int
	// Sample is how often the daemon's memory is read.
	Sample time.Duration
}

// soakTarget is the daemon under load: its addresses, and its process for the memory readings.
type soakTarget struct {
	Addr, MetricsAddr string
	PID               int
}

// soakResult is what the soak saw.
type soakResult struct {
	Duration         time.Duration
	Submitted, Done  int
	CancelledRunning int   // cancelled with points taken
	CancelledQueued  int   // cancelled before their first point
	Watches          int64 // watches followed to their end event
	Delivered        int64 // points delivered to watchers
	Polls            int64
	PollTime         latency // of the instrument state call
	Lost             int64   // points a watcher or the store lacked, against the scan's final record
	Errors           int64
	FirstErrors      []string
	Memory           []memory // one reading per Sample
	ScansAt          []int    // scans submitted at each reading
	// The daemon's goroutines before the load, and after it once its connections have closed.
	GoroutinesBefore, GoroutinesAfter int
}

// soak puts the daemon under load for o.Duration: submitters submit scans and cancel them after a random
// wait (some run to the end first, some are cancelled running, most while queued), pollers read the
// instrument's state and a recent scan, watchers follow recent scans from point 0 to the end. Each watch must
// deliver exactly the points of the scan's final record, in order; afterwards every scan must be ended with
// its stored points matching its record. Any other outcome of any call is an error. Everything is bounded:
// the load stops at the deadline, outstanding scans are cancelled, and the watches end with their scans.
func soak(ctx context.Context, t soakTarget, o soakOptions, progress func(string)) (*soakResult, error) {
	r := &soakResult{}
	s := &soakRun{o: o, r: r, recent: make([]string, 0, 8)}
	var err error
	if r.GoroutinesBefore, err = goroutines(ctx, t.MetricsAddr); err != nil {
		return nil, err
	}
	newClient := func() (*client.Client, error) { return client.New(t.Addr, client.WithTimeout(30*time.Second)) }
	var conns []*client.Client
	closeAll := func() {
		for _, c := range conns {
			c.Close()
		}
		conns = nil
	}
	defer closeAll()
	for range o.Submitters + o.Pollers + o.WatchConns {
		c, err := newClient()
		if err != nil {
			return nil, err
		}
		conns = append(conns, c)
	}
	// The load ends by cancellation, not by a deadline: a call that fails because the load ended then always
	// finds the load's context ended too (a child's own deadline timer could fire first).
	load, stopLoad := context.WithCancel(ctx)
	defer stopLoad()
	defer time.AfterFunc(o.Duration, stopLoad).Stop()
	// Watches still open at the end of the load end with their scans (all cancelled); this bounds the wait.
	drain, stopDrain := context.WithCancel(ctx)
	defer stopDrain()
	defer time.AfterFunc(o.Duration+time.Minute, stopDrain).Stop()

	var wg sync.WaitGroup
	start := time.Now()
	for i := range o.Submitters {
		wg.Add(1)
		go func() { defer wg.Done(); s.submitter(load, conns[i], rand.New(rand.NewPCG(uint64(i), 1))) }()
	}
	pollTimes := make([][]time.Duration, o.Pollers)
	for i := range o.Pollers {
		wg.Add(1)
		go func() {
			defer wg.Done()
			pollTimes[i] = s.poller(load, conns[o.Submitters+i], rand.New(rand.NewPCG(uint64(i), 3)))
		}()
	}
	for i := range o.Watchers {
		c := conns[o.Submitters+o.Pollers+i%o.WatchConns]
		wg.Add(1)
		go func() { defer wg.Done(); s.watcher(load, drain, c, rand.New(rand.NewPCG(uint64(i), 2))) }()
	}
	sampled := make(chan struct{})
	go func() {
		defer close(sampled)
		tick := time.NewTicker(o.Sample)
		defer tick.Stop()
		for {
			if m, err := readMemory(t.PID); err == nil {
				r.Memory, r.ScansAt = append(r.Memory, m), append(r.ScansAt, int(s.submitted.Load()))
			}
			select {
			case <-load.Done():
				return
			case <-tick.C:
				if progress != nil && len(r.Memory)%10 == 0 {
					progress(fmt.Sprintf("soak %v: %d scans, %d watches, %d points delivered, %d errors",
						time.Since(start).Round(time.Second), s.submitted.Load(), s.watches.Load(), s.delivered.Load(), s.errors.Load()))
				}
			}
		}
	}()
	wg.Wait()
	<-sampled
	r.Duration = time.Since(start)
	s.checkStore(drain, conns[:o.Submitters+o.Pollers])
	r.Submitted, r.Watches, r.Delivered, r.Polls = int(s.submitted.Load()), s.watches.Load(), s.delivered.Load(), s.polls.Load()
	var polls []time.Duration
	for _, p := range pollTimes {
		polls = append(polls, p...)
	}
	r.PollTime = latencyOf(polls)
	r.Lost, r.Errors = s.lost.Load(), s.errors.Load()
	closeAll()
	// The daemon ends a connection's goroutines when it notices the connection closed: give it a moment.
	for wait := time.Now().Add(10 * time.Second); ; {
		if r.GoroutinesAfter, err = goroutines(ctx, t.MetricsAddr); err != nil {
			return r, err
		}
		if r.GoroutinesAfter <= r.GoroutinesBefore || time.Now().After(wait) {
			return r, nil
		}
		time.Sleep(200 * time.Millisecond)
	}
}

// soakRun is the shared state of one soak.
type soakRun struct {
	o                                          soakOptions
	r                                          *soakResult
	submitted, watches, delivered, polls, lost atomic.Int64
	errors                                     atomic.Int64

	mu      sync.Mutex
	recent  []string // the latest scans submitted, newest last
	ids     []string // every scan submitted
	running string   // the scan running at the latest poll
}

// fail counts an unexpected outcome and keeps the first few.
func (s *soakRun) fail(format string, args ...any) {
	if s.errors.Add(1) <= 10 {
		s.mu.Lock()
		s.r.FirstErrors = append(s.r.FirstErrors, fmt.Sprintf(format, args...))
		s.mu.Unlock()
	}
}

func (s *soakRun) note(id string) {
	s.mu.Lock()
	defer s.mu.Unlock()
	if len(s.recent) == cap(s.recent) {
		s.recent = append(s.recent[:0], s.recent[1:]...)
	}
	s.recent = append(s.recent, id)
	s.ids = append(s.ids, id)
}

// pick chooses a scan to watch: the running one half of the time, else one of the latest submitted.
func (s *soakRun) pick(rng *rand.Rand) string {
	s.mu.Lock()
	defer s.mu.Unlock()
	if s.running != "" && rng.IntN(2) == 0 {
		return s.running
	}
	if len(s.recent) == 0 {
		return ""
	}
	return s.recent[rng.IntN(len(s.recent))]
}

// submitter submits a scan, waits up to a second, cancels it, and again, until the load ends.
func (s *soakRun) submitter(ctx context.Context, c *client.Client, rng *rand.Rand) {
	for ctx.Err() == nil {
		sc, err := c.Submit(ctx, client.ScanRequest{Kind: client.Timed, Points: 20 + rng.IntN(s.o.MaxPoints-19),
			Dwell: s.o.SimDwell, Label: "soak"})
		if err != nil {
			if ctx.Err() == nil {
				s.fail("submit: %v", err)
			}
			continue
		}
		s.submitted.Add(1)
		s.note(sc.ID)
		select {
		case <-ctx.Done():
		case <-time.After(time.Duration(rng.Int64N(int64(time.Second)))):
		}
		s.cancel(c, sc.ID)
	}
}

// cancel cancels a scan; a refusal is right only when the scan had already ended.
func (s *soakRun) cancel(c *client.Client, id string) {
	ctx, stop := context.WithTimeout(context.Background(), 30*time.Second)
	defer stop()
	if _, err := c.Cancel(ctx, id); err == nil {
		return
	} else if !errors.Is(err, client.ErrRefused) {
		s.fail("cancel %s: %v", id, err)
		return
	}
	sc, err := c.Scan(ctx, id)
	switch {
	case err != nil:
		s.fail("scan %s after a refused cancel: %v", id, err)
	case !sc.State.Terminal():
		s.fail("cancel %s refused while it is %s", id, sc.State)
	}
}

// poller reads the instrument's state and a recent scan every 20 ms, until the load ends, and returns how
// long each state call took.
func (s *soakRun) poller(ctx context.Context, c *client.Client, rng *rand.Rand) []time.Duration {
	tick := time.NewTicker(20 * time.Millisecond)
	defer tick.Stop()
	var took []time.Duration
	for {
		select {
		case <-ctx.Done():
			return took
		case <-tick.C:
		}
		t0 := time.Now()
		st, err := c.State(ctx)
		switch {
		case err == nil:
			took = append(took, time.Since(t0))
			s.mu.Lock()
			s.running = st.ScanID
			s.mu.Unlock()
		case ctx.Err() == nil:
			s.fail("state: %v", err)
		}
		if id := s.pick(rng); id != "" {
			if _, err := c.Scan(ctx, id); err != nil && ctx.Err() == nil {
				s.fail("scan %s: %v", id, err)
			}
		}
		s.polls.Add(1)
	}
}

// watcher follows recent scans, one after another, until the load ends; the watch under way then runs on to
// its end (bounded by drain).
func (s *soakRun) watcher(load, drain context.Context, c *client.Client, rng *rand.Rand) {
	scans := goniodv1.NewScansClient(c.Conn())
	for load.Err() == nil {
		id := s.pick(rng)
		if id == "" {
			time.Sleep(10 * time.Millisecond)
			continue
		}
		got, done, err := s.watchOne(drain, scans, id)
		s.delivered.Add(int64(got))
		switch {
		case err != nil:
			s.fail("watch %s: %v", id, err)
		case got != done:
			s.lost.Add(int64(max(done-got, got-done)))
			s.fail("watch %s delivered %d points; its final record has %d", id, got, done)
		default:
			s.watches.Add(1)
		}
	}
}

// watchOne follows one scan from point 0 to its end event and returns the points delivered and the final
// record's point count.
func (s *soakRun) watchOne(ctx context.Context, scans goniodv1.ScansClient, id string) (got, done int, err error) {
	ctx, cancel := context.WithCancel(ctx)
	defer cancel()
	st, err := scans.WatchScan(ctx, &goniodv1.WatchScanRequest{Id: id})
	if err != nil {
		return 0, 0, err
	}
	for {
		ev, err := st.Recv()
		if err != nil {
			return got, 0, err
		}
		if p := ev.GetPoint(); p != nil {
			if int(p.Index) != got {
				return got, 0, fmt.Errorf("point %d where %d was due", p.Index, got)
			}
			got++
		}
		if ev.GetEnd() {
			return got, int(ev.GetState().GetPointsDone()), nil
		}
	}
}

// checkStore checks every scan of the soak after the load: ended, with as many stored points as its record.
// It spreads its calls over the load's connections and paces them, keeping within each one's call rate.
func (s *soakRun) checkStore(ctx context.Context, conns []*client.Client) {
	s.mu.Lock()
	ids := append([]string(nil), s.ids...)
	s.mu.Unlock()
	pace := time.NewTicker(time.Second / time.Duration(40*len(conns)))
	defer pace.Stop()
	for i, id := range ids {
		<-pace.C
		c := conns[i%len(conns)]
		scans := goniodv1.NewScansClient(c.Conn())
		sc, err := waitEnded(ctx, c, id)
		if err != nil {
			s.fail("scan %s after the soak: %v", id, err)
			continue
		}
		switch sc.State {
		case client.Done:
			s.r.Done++
		case client.Cancelled:
			if sc.PointsDone > 0 {
				s.r.CancelledRunning++
			} else {
				s.r.CancelledQueued++
			}
		default:
			s.fail("scan %s ended %s: %s", id, sc.State, sc.Reason)
		}
		n, err := countPoints(ctx, scans, id)
		if err != nil {
			s.fail("read points of %s: %v", id, err)
		} else if n != sc.PointsDone {
			s.lost.Add(int64(max(n-sc.PointsDone, sc.PointsDone-n)))
			s.fail("scan %s stores %d points; its record has %d", id, n, sc.PointsDone)
		}
	}
}

// waitEnded polls a scan until it is in a terminal state.
func waitEnded(ctx context.Context, c *client.Client, id string) (client.Scan, error) {
	for {
		sc, err := c.Scan(ctx, id)
		if err != nil || sc.State.Terminal() {
			return sc, err
		}
		select {
		case <-ctx.Done():
			return sc, fmt.Errorf("still %s: %w", sc.State, ctx.Err())
		case <-time.After(20 * time.Millisecond):
		}
	}
}

// countPoints reads a scan's stored points and checks their order.
func countPoints(ctx context.Context, scans goniodv1.ScansClient, id string) (int, error) {
	st, err := scans.ReadPoints(ctx, &goniodv1.ReadPointsRequest{Id: id})
	if err != nil {
		return 0, err
	}
	n := 0
	for {
		p, err := st.Recv()
		if err != nil {
			if errors.Is(err, io.EOF) {
				return n, nil
			}
			return n, err
		}
		if int(p.Index) != n {
			return n, fmt.Errorf("point %d where %d was due", p.Index, n)
		}
		n++
	}
}
