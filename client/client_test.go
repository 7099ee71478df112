package client

import (
	"context"
	"errors"
	"net"
	"sync/atomic"
	"testing"
	"time"

	"google.golang.org/genproto/googleapis/rpc/errdetails"
	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"

	goniodv1 "goniod/proto/goniod/v1"
)

// fakeInstrument answers GetState after failing `unavailable` times, always refuses Move as unavailable,
// refuses SetSource with a field error, and streams states until the client leaves.
type fakeInstrument struct {
	goniodv1.UnimplementedInstrumentServer
	unavailable          int32
	stateCalls, movesRun atomic.Int32
}

func (f *fakeInstrument) GetState(context.Context, *goniodv1.GetStateRequest) (*goniodv1.InstrumentState, error) {
	if f.stateCalls.Add(1) <= f.unavailable {
		return nil, status.Error(codes.Unavailable, "instrument link restarting")
	}
	return &goniodv1.InstrumentState{Instrument: "bench-a", Link: goniodv1.LinkState_LINK_STATE_UP}, nil
}

func (f *fakeInstrument) Move(context.Context, *goniodv1.MoveRequest) (*goniodv1.InstrumentState, error) {
	f.movesRun.Add(1)
	return nil, status.Error(codes.Unavailable, "instrument link down")
}

func (f *fakeInstrument) SetSource(context.Context, *goniodv1.SetSourceRequest) (*goniodv1.InstrumentState, error) {
	st, _ := status.New(codes.InvalidArgument, "refused").WithDetails(&errdetails.BadRequest{
		FieldViolations: []*errdetails.BadRequest_FieldViolation{{Field: "kv", Description: "300 kV is outside [0, 35] kV"}}})
	return nil, st.Err()
}

func (f *fakeInstrument) WatchState(_ *goniodv1.WatchStateRequest, s grpc.ServerStreamingServer[goniodv1.InstrumentState]) error {
	for {
		if err := s.Send(&goniodv1.InstrumentState{Instrument: "bench-a"}); err != nil {
			return err
		}
		select {
		case <-s.Context().Done():
			return s.Context().Err()
		case <-time.After(5 * time.Millisecond):
		}
	}
}

func startFake(t *testing.T, f *fakeInstrument, opts ...Option) *Client {
	t.Helper()
	lis, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	srv := grpc.NewServer()
	goniodv1.RegisterInstrumentServer(srv, f)
	go srv.Serve(lis)
	t.Cleanup(srv.Stop)
	c, err := New(lis.Addr().String(), opts...)
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { c.Close() })
	return c
}

// TestRetriesIdempotentCalls: a state query is retried while the daemon says unavailable; a move is not
// repeated behind the caller's back.
func TestRetriesIdempotentCalls(t *testing.T) {
	f := &fakeInstrument{unavailable: 2}
	c := startFake(t, f, WithRetries(3, time.Millisecond))
	s, err := c.State(context.Background())
	if err != nil || s.Instrument != "bench-a" || s.Link != "up" {
		t.Fatalf("State after two unavailable answers: %+v, %v", s, err)
	}
	if n := f.stateCalls.Load(); n != 3 {
		t.Errorf("GetState called %d times, want 3 (two retries)", n)
	}
	_, err = c.Move(context.Background(), "theta", 22.5)
	if !errors.Is(err, ErrUnavailable) {
		t.Errorf("Move: %v, want ErrUnavailable", err)
	}
	if n := f.movesRun.Load(); n != 1 {
		t.Errorf("Move sent %d times, want once (not idempotent)", n)
	}
}

// TestRetriesGiveUp: after the configured retries the caller gets the unavailable error.
func TestRetriesGiveUp(t *testing.T) {
	f := &fakeInstrument{unavailable: 100}
	c := startFake(t, f, WithRetries(2, time.Millisecond))
	if _, err := c.State(context.Background()); !errors.Is(err, ErrUnavailable) {
		t.Errorf("State: %v, want ErrUnavailable", err)
	}
	if n := f.stateCalls.Load(); n != 3 {
		t.Errorf("GetState called %d times, want 3 (one try and two retries)", n)
	}
}

// TestErrorsMapToSentinels: gRPC codes become the package's sentinels, with the refused fields.
func TestErrorsMapToSentinels(t *testing.T) {
	c := startFake(t, &fakeInstrument{})
	kv := 300.0
	_, err := c.SetSource(context.Background(), SourceChange{KV: &kv})
	if !errors.Is(err, ErrInvalid) {
		t.Fatalf("SetSource: %v, want ErrInvalid", err)
	}
	if f := FieldErrors(err); len(f) != 1 || f[0].Field != "kv" || f[0].Reason != "300 kV is outside [0, 35] kV" {
		t.Errorf("field errors %+v", f)
	}
	if _, err := c.Count(context.Background(), time.Second); !errors.Is(err, ErrUnimplemented) {
		t.Errorf("Count on a daemon without it: %v, want ErrUnimplemented", err)
	}
	for code, want := range map[codes.Code]error{codes.NotFound: ErrNotFound, codes.FailedPrecondition: ErrRefused,
		codes.Unauthenticated: ErrUnauthenticated, codes.PermissionDenied: ErrPermissionDenied} {
		if err := mapError(status.Error(code, "x")); !errors.Is(err, want) {
			t.Errorf("%v maps to %v, want %v", code, err, want)
		}
	}
}

// TestStreamEndsWithContext: a stream's channel closes when its context ends, and Err says so.
func TestStreamEndsWithContext(t *testing.T) {
	c := startFake(t, &fakeInstrument{})
	ctx, cancel := context.WithCancel(context.Background())
	defer cancel()
	st, err := c.WatchState(ctx, 50*time.Millisecond)
	if err != nil {
		t.Fatal(err)
	}
	n := 0
	for range st.C {
		if n++; n == 3 {
			cancel()
		}
	}
	if err := st.Err(); !errors.Is(err, context.Canceled) {
		t.Errorf("Err after cancel: %v, want context.Canceled", err)
	}
}
