package auth

import (
	"context"
	"log/slog"
	"net"
	"strings"
	"time"

	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/credentials"
	"google.golang.org/grpc/metadata"
	"google.golang.org/grpc/peer"
	"google.golang.org/grpc/status"
	"google.golang.org/protobuf/encoding/protojson"
	"google.golang.org/protobuf/proto"
)

// Options configure a Guard.
type Options struct {
	// Tokens from the tokens file; nil means no tokens file: every caller may do everything (loopback or a
	// TLS-protected network only; the server refuses other set-ups).
	Tokens *Tokens
	// Log receives the audit lines.
	Log    *slog.Logger
	Limits Limits
	// OnControl is called after every control call that succeeded (the safety policy's idle timer).
	OnControl func()
	// Now is the clock of the rate limit (default time.Now).
	Now func() time.Time
}

// Guard authenticates, authorises, rate-limits and audits gRPC calls through its interceptors.
type Guard struct {
	tokens    *Tokens
	log       *slog.Logger
	lim       *limiter
	onControl func()
}

// NewGuard returns a Guard.
func NewGuard(o Options) *Guard {
	if o.Now == nil {
		o.Now = time.Now
	}
	if o.Limits.RequestsPerSecond > 0 && o.Limits.Burst < 1 {
		o.Limits.Burst = 1
	}
	if o.OnControl == nil {
		o.OnControl = func() {}
	}
	return &Guard{tokens: o.Tokens, log: o.Log, lim: newLimiter(o.Limits, o.Now), onControl: o.OnControl}
}

// call is what the guard knows about one call.
type call struct {
	method string
	id     Identity
	peer   string
	key    string // rate-limit key
	need   Role
}

// Unary is the unary server interceptor.
func (g *Guard) Unary(ctx context.Context, req any, info *grpc.UnaryServerInfo, handler grpc.UnaryHandler) (any, error) {
	c, err := g.admit(ctx, info.FullMethod, req, false)
	if err != nil {
		return nil, err
	}
	start := time.Now()
	resp, err := handler(WithIdentity(ctx, c.id), req)
	if c.need >= Operator {
		g.audit(c, req, resp, err, time.Since(start))
		if err == nil {
			g.onControl()
		}
	}
	return resp, err
}

// Stream is the stream server interceptor. Streams are authorised on the method alone.
func (g *Guard) Stream(srv any, ss grpc.ServerStream, info *grpc.StreamServerInfo, handler grpc.StreamHandler) error {
	c, err := g.admit(ss.Context(), info.FullMethod, nil, true)
	if err != nil {
		return err
	}
	if !g.lim.openStream(c.key) {
		return status.Errorf(codes.ResourceExhausted, "%s has too many open streams; close some first", c.id.Name)
	}
	defer g.lim.closeStream(c.key)
	return handler(srv, &identityStream{ServerStream: ss, ctx: WithIdentity(ss.Context(), c.id)})
}

type identityStream struct {
	grpc.ServerStream
	ctx context.Context
}

func (s *identityStream) Context() context.Context { return s.ctx }

// admit identifies the caller, checks the rate and the role. Refusals of control calls and failed
// authentications are audited. Failed authentications count against the peer host's rate; stream starts that
// pass are bounded by the number of open streams instead of the rate.
func (g *Guard) admit(ctx context.Context, method string, req any, stream bool) (call, error) {
	c := call{method: method, peer: peerAddr(ctx)}
	c.key = peerHost(c.peer)
	need, known := Required(method, req)
	c.need = need
	id, err := g.identify(ctx, need)
	if err != nil {
		if !g.lim.allow(c.key) {
			return c, status.Error(codes.ResourceExhausted, "too many requests; slow down")
		}
		g.log.Warn("audit: unauthenticated call refused", "call", shortMethod(method), "peer", c.peer, "why", status.Convert(err).Message())
		return c, err
	}
	c.id = id
	switch {
	case id.Via != "none":
		c.key = id.Via + ":" + id.Name
	case isLoopback(c.peer):
		c.key = "connection:" + c.peer // local users without tokens: each connection on its own
	}
	if !stream && !g.lim.allow(c.key) {
		err := status.Errorf(codes.ResourceExhausted, "%s sends more than %g requests per second; slow down", id.Name, g.lim.lim.RequestsPerSecond)
		if need >= Operator {
			g.audit(c, req, nil, err, 0)
		}
		return c, err
	}
	switch {
	case !known:
		err = status.Errorf(codes.PermissionDenied, "%s: no access policy covers this method", shortMethod(method))
	case id.Role < need:
		err = status.Errorf(codes.PermissionDenied, "%s needs the %s role; %s has %s", shortMethod(method), need, id.Name, id.Role)
	}
	if err != nil {
		g.audit(c, req, nil, err, 0)
	}
	return c, err
}

// identify finds who calls: by bearer token when a tokens file is loaded, else by client certificate, else
// anonymous. Tokens never appear in errors or logs.
func (g *Guard) identify(ctx context.Context, need Role) (Identity, error) {
	if g.tokens == nil {
		if name := certName(ctx); name != "" {
			return Identity{Name: name, Role: Admin, Via: "certificate"}, nil
		}
		return Identity{Name: "anonymous", Role: Admin, Via: "none"}, nil
	}
	md, _ := metadata.FromIncomingContext(ctx)
	vals := md.Get("authorization")
	if len(vals) == 0 {
		if need == Public {
			return Identity{Name: "anonymous", Role: Public, Via: "none"}, nil
		}
		return Identity{}, status.Error(codes.Unauthenticated, "this daemon needs a bearer token (gonio --token-file FILE or GONIO_TOKEN)")
	}
	if len(vals) > 1 {
		return Identity{}, status.Error(codes.Unauthenticated, "more than one authorization header")
	}
	scheme, token, ok := strings.Cut(vals[0], " ")
	if !ok || !strings.EqualFold(scheme, "bearer") {
		return Identity{}, status.Error(codes.Unauthenticated, `authorization must be "Bearer TOKEN"`)
	}
	id, ok := g.tokens.Lookup(strings.TrimSpace(token))
	if !ok {
		return Identity{}, status.Error(codes.Unauthenticated, "unknown token")
	}
	return id, nil
}

// certName is the common name of a verified client certificate, if any.
func certName(ctx context.Context) string {
	p, ok := peer.FromContext(ctx)
	if !ok {
		return ""
	}
	ti, ok := p.AuthInfo.(credentials.TLSInfo)
	if !ok || len(ti.State.VerifiedChains) == 0 || len(ti.State.VerifiedChains[0]) == 0 {
		return ""
	}
	return ti.State.VerifiedChains[0][0].Subject.CommonName
}

func peerAddr(ctx context.Context) string {
	if p, ok := peer.FromContext(ctx); ok && p.Addr != nil {
		return p.Addr.String()
	}
	return "unknown"
}

func isLoopback(addr string) bool {
	host, _, err := net.SplitHostPort(addr)
	ip := net.ParseIP(host)
	return err == nil && ip != nil && ip.IsLoopback()
}

func peerHost(addr string) string {
	if h, _, err := net.SplitHostPort(addr); err == nil {
		return "host:" + h
	}
	return "host:" + addr
}

// shortMethod turns "/goniod.v1.Scans/SubmitScan" into "Scans/SubmitScan".
func shortMethod(m string) string {
	svc, name, ok := strings.Cut(strings.TrimPrefix(m, "/"), "/")
	if !ok {
		return m
	}
	return svc[strings.LastIndex(svc, ".")+1:] + "/" + name
}

// maxAuditRequest bounds the request text in an audit line.
const maxAuditRequest = 1024

// audit logs one control action: who, what, when (the line's time), and the result.
func (g *Guard) audit(c call, req, resp any, err error, took time.Duration) {
	code := status.Code(err)
	attrs := []any{"who", c.id.Name, "role", c.id.Role.String(), "via", c.id.Via, "peer", c.peer,
		"call", shortMethod(c.method), "result", code.String()}
	attrs = append(attrs, subjectAttrs(req, resp)...)
	if m, ok := req.(proto.Message); ok && req != nil {
		if b, merr := protojson.Marshal(m); merr == nil && string(b) != "{}" {
			s := string(b)
			if len(s) > maxAuditRequest {
				s = s[:maxAuditRequest] + "…"
			}
			attrs = append(attrs, "request", s)
		}
	}
	if took > 0 {
		attrs = append(attrs, "took", took)
	}
	level := slog.LevelInfo
	if err != nil {
		attrs = append(attrs, "error", status.Convert(err).Message())
		if code == codes.PermissionDenied || code == codes.Unauthenticated || code == codes.ResourceExhausted {
			level = slog.LevelWarn
		}
	}
	g.log.Log(context.Background(), level, "audit", attrs...)
}

// subjectAttrs names the scan or series a call concerns, from its request or its answer.
func subjectAttrs(req, resp any) []any {
	type ider interface{ GetId() string }
	type series interface {
		ider
		GetScanIds() []string
	}
	if s, ok := resp.(series); ok && s.GetId() != "" {
		return []any{"series", s.GetId(), "scans", strings.Join(s.GetScanIds(), ",")}
	}
	for _, v := range []any{req, resp} {
		if x, ok := v.(ider); ok && x.GetId() != "" {
			return []any{"scan", x.GetId()}
		}
	}
	return nil
}
