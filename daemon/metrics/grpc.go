package metrics

import (
	"context"
	"strings"
	"time"

	"github.com/prometheus/client_golang/prometheus"
	"google.golang.org/grpc"
	"google.golang.org/grpc/status"
)

// GRPC counts the gRPC server's calls through its interceptors: calls started and handled by code, handling
// time of unary calls, open streams and messages streamed.
type GRPC struct {
	started  *prometheus.CounterVec
	handled  *prometheus.CounterVec
	handling *prometheus.HistogramVec
	open     *prometheus.GaugeVec
	sent     *prometheus.CounterVec
}

// NewGRPC registers the gRPC server metrics on reg.
func NewGRPC(reg prometheus.Registerer) *GRPC {
	labels := []string{"service", "method", "type"}
	g := &GRPC{
		started: prometheus.NewCounterVec(prometheus.CounterOpts{Name: "goniod_grpc_server_started_total",
			Help: "gRPC calls started."}, labels),
		handled: prometheus.NewCounterVec(prometheus.CounterOpts{Name: "goniod_grpc_server_handled_total",
			Help: "gRPC calls finished, by status code."}, append(labels, "code")),
		handling: prometheus.NewHistogramVec(prometheus.HistogramOpts{Name: "goniod_grpc_server_handling_seconds",
			Help:    "Time to handle a unary gRPC call.",
			Buckets: prometheus.ExponentialBuckets(50e-6, 4, 10)}, []string{"service", "method"}),
		open: prometheus.NewGaugeVec(prometheus.GaugeOpts{Name: "goniod_grpc_server_streams_open",
			Help: "Server streams open now (watches, point reads)."}, []string{"service", "method"}),
		sent: prometheus.NewCounterVec(prometheus.CounterOpts{Name: "goniod_grpc_server_stream_messages_sent_total",
			Help: "Messages sent on server streams."}, []string{"service", "method"}),
	}
	reg.MustRegister(g.started, g.handled, g.handling, g.open, g.sent)
	return g
}

// splitMethod turns "/goniod.v1.Scans/SubmitScan" into ("goniod.v1.Scans", "SubmitScan").
func splitMethod(full string) (string, string) {
	svc, m, ok := strings.Cut(strings.TrimPrefix(full, "/"), "/")
	if !ok {
		return "unknown", "unknown"
	}
	return svc, m
}

// Unary is the unary server interceptor; put it first so that it also counts refused calls.
func (g *GRPC) Unary(ctx context.Context, req any, info *grpc.UnaryServerInfo, handler grpc.UnaryHandler) (any, error) {
	svc, m := splitMethod(info.FullMethod)
	g.started.WithLabelValues(svc, m, "unary").Inc()
	t0 := time.Now()
	resp, err := handler(ctx, req)
	g.handling.WithLabelValues(svc, m).Observe(time.Since(t0).Seconds())
	g.handled.WithLabelValues(svc, m, "unary", status.Code(err).String()).Inc()
	return resp, err
}

// Stream is the stream server interceptor.
func (g *GRPC) Stream(srv any, ss grpc.ServerStream, info *grpc.StreamServerInfo, handler grpc.StreamHandler) error {
	svc, m := splitMethod(info.FullMethod)
	kind := "server_stream"
	if info.IsClientStream {
		kind = "bidi_stream"
		if !info.IsServerStream {
			kind = "client_stream"
		}
	}
	g.started.WithLabelValues(svc, m, kind).Inc()
	open := g.open.WithLabelValues(svc, m)
	open.Inc()
	err := handler(srv, &countingStream{ServerStream: ss, sent: g.sent.WithLabelValues(svc, m)})
	open.Dec()
	g.handled.WithLabelValues(svc, m, kind, status.Code(err).String()).Inc()
	return err
}

type countingStream struct {
	grpc.ServerStream
	sent prometheus.Counter
}

func (s *countingStream) SendMsg(m any) error {
	err := s.ServerStream.SendMsg(m)
	if err == nil {
		s.sent.Inc()
	}
	return err
}
