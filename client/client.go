// Package client is the Go client of goniod: typed calls that return domain values, TLS and bearer-token
// authentication, retries of idempotent calls while the daemon is unavailable, and server streams as channels.
//
//	c, err := client.New("127.0.0.1:7461")
//	if err != nil { ... }
//	defer c.Close()
//	s, err := c.Submit(ctx, client.ScanRequest{Kind: client.Coupled, From: 10, To: 30, Step: 0.1, Dwell: time.Second})
package client

import (
	"context"
	"crypto/tls"
	"crypto/x509"
	"errors"
	"fmt"
	"os"
	"time"

	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/credentials"
	"google.golang.org/grpc/credentials/insecure"
	"google.golang.org/grpc/status"

	goniodv1 "goniod/proto/goniod/v1"
)

// DefaultAddr is where goniod listens by default.
const DefaultAddr = "127.0.0.1:7461"

// Client talks to one goniod. It is safe for concurrent use.
type Client struct {
	conn       *grpc.ClientConn
	scans      goniodv1.ScansClient
	instrument goniodv1.InstrumentClient
	analysis   goniodv1.AnalysisClient
	o          options
}

type options struct {
	tls         *tls.Config
	token       string
	timeout     time.Duration
	retries     int
	retryDelay  time.Duration
	dialOptions []grpc.DialOption
	err         error
}

// Option configures a client.
type Option func(*options)

// WithTLS connects with TLS, trusting the CA in caFile (empty: the system roots). certFile and keyFile, when
// both set, present a client certificate.
func WithTLS(caFile, certFile, keyFile string) Option {
	return func(o *options) {
		tc := &tls.Config{MinVersion: tls.VersionTLS12}
		if caFile != "" {
			pem, err := os.ReadFile(caFile)
			if err != nil {
				o.err = fmt.Errorf("TLS CA: %w", err)
				return
			}
			pool := x509.NewCertPool()
			if !pool.AppendCertsFromPEM(pem) {
				o.err = fmt.Errorf("TLS CA %s: no PEM certificates", caFile)
				return
			}
			tc.RootCAs = pool
		}
		if certFile != "" || keyFile != "" {
			cert, err := tls.LoadX509KeyPair(certFile, keyFile)
			if err != nil {
				o.err = fmt.Errorf("TLS client certificate: %w", err)
				return
			}
			tc.Certificates = []tls.Certificate{cert}
		}
		o.tls = tc
	}
}

// WithTLSConfig connects with the given TLS configuration.
func WithTLSConfig(tc *tls.Config) Option { return func(o *options) { o.tls = tc } }

// WithToken sends a bearer token with every call.
func WithToken(token string) Option { return func(o *options) { o.token = token } }

// WithTimeout bounds every unary call (default 30 s). Streams are bounded by their context only.
func WithTimeout(d time.Duration) Option { return func(o *options) { o.timeout = d } }

// WithRetries sets how often an idempotent call is retried while the daemon is unavailable (default 3), and
// the first delay, doubled at each retry (default 200 ms).
func WithRetries(n int, first time.Duration) Option {
	return func(o *options) { o.retries, o.retryDelay = n, first }
}

// WithDialOptions adds gRPC dial options.
func WithDialOptions(opts ...grpc.DialOption) Option {
	return func(o *options) { o.dialOptions = append(o.dialOptions, opts...) }
}

// New connects to goniod at addr (host:port). The connection is made lazily; the first call reports a
// daemon that is not there.
func New(addr string, opts ...Option) (*Client, error) {
	o := options{timeout: 30 * time.Second, retries: 3, retryDelay: 200 * time.Millisecond}
	for _, opt := range opts {
		opt(&o)
	}
	if o.err != nil {
		return nil, o.err
	}
	if addr == "" {
		addr = DefaultAddr
	}
	dial := append([]grpc.DialOption{grpc.WithDefaultCallOptions(grpc.MaxCallRecvMsgSize(16 << 20))}, o.dialOptions...)
	if o.tls != nil {
		dial = append(dial, grpc.WithTransportCredentials(credentials.NewTLS(o.tls)))
	} else {
		dial = append(dial, grpc.WithTransportCredentials(insecure.NewCredentials()))
	}
	if o.token != "" {
		dial = append(dial, grpc.WithPerRPCCredentials(bearer{token: o.token, secure: o.tls != nil}))
	}
	conn, err := grpc.NewClient(addr, dial...)
	if err != nil {
		return nil, fmt.Errorf("goniod at %s: %w", addr, err)
	}
	return &Client{conn: conn, scans: goniodv1.NewScansClient(conn), instrument: goniodv1.NewInstrumentClient(conn),
		analysis: goniodv1.NewAnalysisClient(conn), o: o}, nil
}

// Close closes the connection.
func (c *Client) Close() error { return c.conn.Close() }

// Conn is the underlying gRPC connection (for the health service or generated stubs).
func (c *Client) Conn() *grpc.ClientConn { return c.conn }

// bearer sends the token as gRPC metadata "authorization: Bearer …".
type bearer struct {
	token  string
	secure bool
}

func (b bearer) GetRequestMetadata(context.Context, ...string) (map[string]string, error) {
	return map[string]string{"authorization": "Bearer " + b.token}, nil
}

// RequireTransportSecurity is false so tokens also work over loopback without TLS; goniod refuses a
// non-loopback address without TLS unless started with --insecure.
func (b bearer) RequireTransportSecurity() bool { return false }

// unary runs an RPC with the client's timeout; idempotent calls are retried while the daemon is unavailable.
func unary[T any](ctx context.Context, c *Client, idempotent bool, call func(ctx context.Context) (T, error)) (T, error) {
	delay := c.o.retryDelay
	for attempt := 0; ; attempt++ {
		cctx, cancel := context.WithTimeout(ctx, c.o.timeout)
		v, err := call(cctx)
		cancel()
		if err == nil {
			return v, nil
		}
		if !idempotent || status.Code(err) != codes.Unavailable || attempt >= c.o.retries || ctx.Err() != nil {
			return v, mapError(err)
		}
		select {
		case <-ctx.Done():
			return v, mapError(err)
		case <-time.After(delay):
		}
		delay *= 2
	}
}

// Stream is a server stream as a channel. C is closed when the stream ends, fails or its context ends; Err
// then tells why: nil after a normal end, the context's error when the context ended it.
type Stream[T any] struct {
	C    <-chan T
	err  error
	done chan struct{}
}

// Err returns the stream's error once C is closed (it blocks until then).
func (s *Stream[T]) Err() error {
	<-s.done
	return s.err
}

// stream runs recv in a goroutine that ends with the stream.
func stream[T any](ctx context.Context, recv func() (T, error)) *Stream[T] {
	ch := make(chan T, 64)
	s := &Stream[T]{C: ch, done: make(chan struct{})}
	go func() {
		defer close(s.done)
		defer close(ch)
		for {
			v, err := recv()
			if err != nil {
				switch {
				case errors.Is(err, errEndOfStream) || isEOF(err):
				case ctx.Err() != nil:
					s.err = ctx.Err() // the caller ended the stream
				default:
					s.err = mapError(err)
				}
				return
			}
			select {
			case ch <- v:
			case <-ctx.Done():
				s.err = ctx.Err()
				return
			}
		}
	}()
	return s
}

type grpcCallOption = grpc.CallOption
