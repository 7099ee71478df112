package auth

import (
	"bytes"
	"context"
	"log/slog"
	"net"
	"strings"
	"sync"
	"testing"
	"time"

	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/metadata"
	"google.golang.org/grpc/peer"
	"google.golang.org/grpc/status"

	goniodv1 "goniod/proto/goniod/v1"
)

const (
	viewerToken   = "v-0123456789abcdef"
	operatorToken = "op-0123456789abcdef"
	adminToken    = "ad-0123456789abcdef"
)

// syncBuffer is a log sink safe for concurrent writers.
type syncBuffer struct {
	mu sync.Mutex
	b  bytes.Buffer
}

func (s *syncBuffer) Write(p []byte) (int, error) {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.b.Write(p)
}

func (s *syncBuffer) String() string {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.b.String()
}

func newTestGuard(t *testing.T, withTokens bool, lim Limits) (*Guard, *syncBuffer, *int) {
	t.Helper()
	var tok *Tokens
	if withTokens {
		var err error
		tok, err = ParseTokens(strings.NewReader("viewer ana " + viewerToken + "\noperator bo " + operatorToken + "\nadmin cy " + adminToken + "\n"))
		if err != nil {
			t.Fatal(err)
		}
	}
	logs := &syncBuffer{}
	controls := 0
	g := NewGuard(Options{Tokens: tok, Log: slog.New(slog.NewTextHandler(logs, nil)), Limits: lim, OnControl: func() { controls++ }})
	return g, logs, &controls
}

func callCtx(token string) context.Context {
	ctx := peer.NewContext(context.Background(), &peer.Peer{Addr: &net.TCPAddr{IP: net.IPv4(127, 0, 0, 1), Port: 5555}})
	if token != "" {
		ctx = metadata.NewIncomingContext(ctx, metadata.Pairs("authorization", "Bearer "+token))
	}
	return ctx
}

func unary(g *Guard, ctx context.Context, method string, req any) (*Identity, error) {
	var seen *Identity
	_, err := g.Unary(ctx, req, &grpc.UnaryServerInfo{FullMethod: method}, func(ctx context.Context, req any) (any, error) {
		id, _ := FromContext(ctx)
		seen = &id
		return &goniodv1.Scan{Id: "scan-000042"}, nil
	})
	return seen, err
}

func TestGuardRoles(t *testing.T) {
	submit := goniodv1.Scans_SubmitScan_FullMethodName
	cases := []struct {
		name, token, method string
		code                codes.Code
		who                 string
	}{
		{"no token, viewer call", "", goniodv1.Instrument_GetState_FullMethodName, codes.Unauthenticated, ""},
		{"no token, control call", "", submit, codes.Unauthenticated, ""},
		{"no token, health", "", "/grpc.health.v1.Health/Check", codes.OK, "anonymous"},
		{"wrong token", "x-0123456789abcdef", submit, codes.Unauthenticated, ""},
		{"viewer reads", viewerToken, goniodv1.Scans_GetScan_FullMethodName, codes.OK, "ana"},
		{"viewer submits", viewerToken, submit, codes.PermissionDenied, ""},
		{"operator submits", operatorToken, submit, codes.OK, "bo"},
		{"operator stores an alignment", operatorToken, goniodv1.Instrument_Align_FullMethodName, codes.PermissionDenied, ""},
		{"admin stores an alignment", adminToken, goniodv1.Instrument_Align_FullMethodName, codes.OK, "cy"},
		{"unknown method", adminToken, "/goniod.v1.Scans/Unlisted", codes.PermissionDenied, ""},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			g, logs, _ := newTestGuard(t, true, Limits{})
			var req any = &goniodv1.SubmitScanRequest{}
			if c.method == goniodv1.Instrument_Align_FullMethodName {
				req = &goniodv1.AlignRequest{Store: true}
			}
			seen, err := unary(g, callCtx(c.token), c.method, req)
			if status.Code(err) != c.code {
				t.Fatalf("got %v, want %v", err, c.code)
			}
			if c.code != codes.OK && seen != nil {
				t.Fatal("the handler ran for a refused call")
			}
			if c.code == codes.OK && (seen == nil || seen.Name != c.who) {
				t.Fatalf("handler saw identity %+v, want %s", seen, c.who)
			}
			for _, secret := range []string{viewerToken, operatorToken, adminToken, "x-0123456789abcdef"} {
				if strings.Contains(logs.String(), secret) || (err != nil && strings.Contains(err.Error(), secret)) {
					t.Fatalf("a token appears in the log or error: %s %v", logs, err)
				}
			}
		})
	}
}

func TestGuardBadHeaders(t *testing.T) {
	g, _, _ := newTestGuard(t, true, Limits{})
	for _, md := range []metadata.MD{
		metadata.Pairs("authorization", operatorToken),
		metadata.Pairs("authorization", "Basic "+operatorToken),
		metadata.Pairs("authorization", "Bearer "+operatorToken, "authorization", "Bearer "+operatorToken),
	} {
		ctx := metadata.NewIncomingContext(callCtx(""), md)
		if _, err := unary(g, ctx, goniodv1.Scans_SubmitScan_FullMethodName, nil); status.Code(err) != codes.Unauthenticated {
			t.Errorf("%v: got %v, want Unauthenticated", md, err)
		}
	}
	ctx := metadata.NewIncomingContext(callCtx(""), metadata.Pairs("authorization", "bearer  "+operatorToken))
	if _, err := unary(g, ctx, goniodv1.Scans_SubmitScan_FullMethodName, nil); err != nil {
		t.Errorf("lower-case scheme and extra blank: %v", err)
	}
}

func TestGuardWithoutTokensFile(t *testing.T) {
	g, logs, controls := newTestGuard(t, false, Limits{})
	seen, err := unary(g, callCtx(""), goniodv1.Scans_CancelScan_FullMethodName, &goniodv1.ScanRef{Id: "scan-000007"})
	if err != nil || seen.Name != "anonymous" || seen.Role != Admin {
		t.Fatalf("without a tokens file: identity %+v, err %v; want anonymous admin", seen, err)
	}
	if *controls != 1 {
		t.Errorf("OnControl called %d times, want 1", *controls)
	}
	line := logs.String()
	for _, want := range []string{"msg=audit", "who=anonymous", "call=Scans/CancelScan", "result=OK", "scan=scan-000007", "peer=127.0.0.1:5555", "time="} {
		if !strings.Contains(line, want) {
			t.Errorf("audit line %q lacks %q", line, want)
		}
	}
}

func TestGuardAudit(t *testing.T) {
	g, logs, controls := newTestGuard(t, true, Limits{})
	if _, err := unary(g, callCtx(viewerToken), goniodv1.Scans_GetScan_FullMethodName, &goniodv1.GetScanRequest{Id: "scan-000001"}); err != nil {
		t.Fatal(err)
	}
	if logs.String() != "" {
		t.Errorf("a read call was audited: %s", logs)
	}
	if _, err := unary(g, callCtx(operatorToken), goniodv1.Scans_SubmitScan_FullMethodName, &goniodv1.SubmitScanRequest{}); err != nil {
		t.Fatal(err)
	}
	if _, err := unary(g, callCtx(viewerToken), goniodv1.Scans_PauseScan_FullMethodName, &goniodv1.ScanRef{Id: "scan-000042"}); err == nil {
		t.Fatal("viewer paused a scan")
	}
	lines := strings.Split(strings.TrimSpace(logs.String()), "\n")
	if len(lines) != 2 {
		t.Fatalf("%d audit lines, want 2:\n%s", len(lines), logs)
	}
	for i, want := range [][]string{
		{"level=INFO", "who=bo", "role=operator", "call=Scans/SubmitScan", "result=OK", "scan=scan-000042"},
		{"level=WARN", "who=ana", "role=viewer", "call=Scans/PauseScan", "result=PermissionDenied", "scan=scan-000042", "needs the operator role"},
	} {
		for _, w := range want {
			if !strings.Contains(lines[i], w) {
				t.Errorf("audit line %d %q lacks %q", i, lines[i], w)
			}
		}
	}
	if *controls != 1 {
		t.Errorf("OnControl called %d times, want 1 (the successful submit)", *controls)
	}
}

func TestGuardRateLimit(t *testing.T) {
	g, _, _ := newTestGuard(t, true, Limits{RequestsPerSecond: 0.001, Burst: 5})
	for i := range 5 {
		if _, err := unary(g, callCtx(viewerToken), goniodv1.Instrument_GetState_FullMethodName, nil); err != nil {
			t.Fatalf("call %d: %v", i, err)
		}
	}
	if _, err := unary(g, callCtx(viewerToken), goniodv1.Instrument_GetState_FullMethodName, nil); status.Code(err) != codes.ResourceExhausted {
		t.Fatalf("6th call with a burst of 5: %v, want ResourceExhausted", err)
	}
	if _, err := unary(g, callCtx(operatorToken), goniodv1.Instrument_GetState_FullMethodName, nil); err != nil {
		t.Fatalf("another caller limited by the first: %v", err)
	}
	for range 5 {
		_, _ = unary(g, callCtx("x-0123456789abcdef"), goniodv1.Instrument_GetState_FullMethodName, nil)
	}
	if _, err := unary(g, callCtx("x-0123456789abcdef"), goniodv1.Instrument_GetState_FullMethodName, nil); status.Code(err) != codes.ResourceExhausted {
		t.Fatalf("guessing tokens is not rate limited: %v", err)
	}
}

type fakeStream struct {
	grpc.ServerStream
	ctx context.Context
}

func (f fakeStream) Context() context.Context { return f.ctx }

func TestGuardStreams(t *testing.T) {
	g, _, _ := newTestGuard(t, true, Limits{Streams: 1})
	info := &grpc.StreamServerInfo{FullMethod: goniodv1.Scans_WatchScan_FullMethodName, IsServerStream: true}
	release := make(chan struct{})
	started := make(chan Identity)
	done := make(chan error)
	go func() {
		done <- g.Stream(nil, fakeStream{ctx: callCtx(viewerToken)}, info, func(_ any, ss grpc.ServerStream) error {
			id, _ := FromContext(ss.Context())
			started <- id
			<-release
			return nil
		})
	}()
	select {
	case id := <-started:
		if id.Name != "ana" {
			t.Fatalf("stream handler saw %+v", id)
		}
	case err := <-done:
		t.Fatalf("first stream refused: %v", err)
	case <-time.After(5 * time.Second):
		t.Fatal("stream did not start")
	}
	noop := func(any, grpc.ServerStream) error { return nil }
	if err := g.Stream(nil, fakeStream{ctx: callCtx(viewerToken)}, info, noop); status.Code(err) != codes.ResourceExhausted {
		t.Errorf("second stream with a limit of 1: %v, want ResourceExhausted", err)
	}
	if err := g.Stream(nil, fakeStream{ctx: callCtx("")}, info, noop); status.Code(err) != codes.Unauthenticated {
		t.Errorf("stream without a token: %v, want Unauthenticated", err)
	}
	close(release)
	if err := <-done; err != nil {
		t.Fatal(err)
	}
	if err := g.Stream(nil, fakeStream{ctx: callCtx(viewerToken)}, info, noop); err != nil {
		t.Errorf("stream after the first closed: %v", err)
	}
}

func peerCtx(addr string) context.Context {
	ap, err := net.ResolveTCPAddr("tcp", addr)
	if err != nil {
		panic(err)
	}
	return peer.NewContext(context.Background(), &peer.Peer{Addr: ap})
}

// TestGuardRateKeys: without tokens, each loopback connection has its own budget, while connections from one
// network host share one; stream starts count against the open-stream limit, not the rate.
func TestGuardRateKeys(t *testing.T) {
	g, _, _ := newTestGuard(t, false, Limits{RequestsPerSecond: 0.001, Burst: 2})
	get := goniodv1.Instrument_GetState_FullMethodName
	for _, addr := range []string{"127.0.0.1:1000", "127.0.0.1:1000", "127.0.0.1:2000", "127.0.0.1:2000", "192.0.2.7:1000", "192.0.2.7:2000"} {
		if _, err := unary(g, peerCtx(addr), get, nil); err != nil {
			t.Fatalf("%s: %v", addr, err)
		}
	}
	if _, err := unary(g, peerCtx("127.0.0.1:1000"), get, nil); status.Code(err) != codes.ResourceExhausted {
		t.Errorf("third call on one loopback connection with a burst of 2: %v", err)
	}
	if _, err := unary(g, peerCtx("192.0.2.7:3000"), get, nil); status.Code(err) != codes.ResourceExhausted {
		t.Errorf("third call from one network host over a new connection: %v", err)
	}
	info := &grpc.StreamServerInfo{FullMethod: goniodv1.Scans_WatchScan_FullMethodName, IsServerStream: true}
	for i := range 10 {
		if err := g.Stream(nil, fakeStream{ctx: peerCtx("192.0.2.7:4000")}, info, func(any, grpc.ServerStream) error { return nil }); err != nil {
			t.Fatalf("stream %d refused by the rate limit: %v", i, err)
		}
	}
}
