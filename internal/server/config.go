package server

import (
	"errors"
	"fmt"
	"log/slog"
	"net"
	"runtime"
	"time"
)

// Default listen addresses. All three are loopback-only by default; set the
// addresses explicitly (e.g. ":7310") to listen on every interface.
const (
	DefaultGRPCAddr    = "127.0.0.1:7310"
	DefaultHTTPAddr    = "127.0.0.1:7311"
	DefaultMetricsAddr = "127.0.0.1:7312"
)

// Config configures a Server. DefaultConfig gives the documented defaults;
// New rejects zero or negative limits, so start from DefaultConfig.
type Config struct {
	// GRPCAddr is the gRPC listen address (default 127.0.0.1:7310).
	GRPCAddr string
	// HTTPAddr is the JSON/CSV gateway listen address (default
	// 127.0.0.1:7311); "" disables the gateway.
	HTTPAddr string
	// MetricsAddr is the Prometheus /metrics listen address (default
	// 127.0.0.1:7312); "" disables it.
	MetricsAddr string

	// GRPCListener, HTTPListener and MetricsListener, when set, are used
	// instead of listening on the corresponding address (socket activation,
	// in-memory listeners in tests). Serve closes them.
	GRPCListener, HTTPListener, MetricsListener net.Listener

	// HealthAddr, when set, is an extra plain-HTTP listener answering only
	// GET /healthz and GET /readyz (default "": off), for probes that
	// cannot present a client certificate or a token. HealthListener is
	// used instead of listening when set.
	HealthAddr     string
	HealthListener net.Listener

	// TLSCertFile and TLSKeyFile, when both set, turn on TLS (≥ 1.2) for
	// gRPC and the HTTP gateway (PEM files). The metrics and health
	// listeners stay plain HTTP.
	TLSCertFile, TLSKeyFile string
	// TLSClientCAFile, when set, turns on mutual TLS: gRPC and HTTP clients
	// must present a certificate for client authentication that chains to
	// a CA in this PEM file; others fail the handshake. Needs TLS.
	TLSClientCAFile string
	// TokenFile, when set, turns on bearer-token authentication: every
	// KinematicsService call and every HTTP route except /healthz and
	// /readyz needs "authorization: Bearer TOKEN" with a token whose
	// SHA-256 is listed in the file (format: ParseTokens), and each token's
	// optional rate limit applies. The file is read once, by New.
	TokenFile string

	// Reflection registers gRPC server reflection (default true).
	Reflection bool
	// Production refuses configurations unfit to face clients: it needs
	// TLS (TLSCertFile and TLSKeyFile) and reflection off (default false).
	Production bool

	// MaxRecvMsgBytes bounds one received gRPC message and one HTTP request
	// body (default 64 MiB). Larger gRPC messages fail with
	// RESOURCE_EXHAUSTED, larger HTTP bodies with 413.
	MaxRecvMsgBytes int
	// MaxSendMsgBytes bounds one sent gRPC message (default 64 MiB).
	MaxSendMsgBytes int

	// MaxConcurrentRequests bounds analyses running at once, gRPC and HTTP
	// together (default 4 × GOMAXPROCS). A request beyond the limit is
	// answered at once with RESOURCE_EXHAUSTED (HTTP 429), not queued.
	MaxConcurrentRequests int
	// MaxConcurrentStreams bounds open StreamCapture calls (default 64);
	// beyond it a new stream gets RESOURCE_EXHAUSTED.
	MaxConcurrentStreams int
	// RequestTimeout is the deadline given to a unary call or HTTP request
	// that arrives without one (default 30 s). Shorter client deadlines
	// are kept.
	RequestTimeout time.Duration
	// MaxStreamDuration bounds the life of one stream (default 1 h).
	MaxStreamDuration time.Duration
	// StreamIdleTimeout ends a stream that sends nothing for this long
	// (default 60 s).
	StreamIdleTimeout time.Duration
	// MaxConnectionAge, when positive, makes the server close each gRPC
	// connection after roughly this age (with a GOAWAY and a grace of
	// MaxStreamDuration), so that clients re-resolve and spread over new
	// replicas. Default 0: never.
	MaxConnectionAge time.Duration

	// ShutdownDelay is how long Serve keeps serving after it was told to
	// stop while reporting not-ready, so load balancers polling /readyz or
	// gRPC health stop sending new work first (default 0).
	ShutdownDelay time.Duration
	// ShutdownGrace bounds the drain: in-flight requests finish and open
	// streams flush within it, then everything left is stopped hard
	// (default 20 s).
	ShutdownGrace time.Duration
}

// DefaultConfig returns the documented defaults.
func DefaultConfig() Config {
	return Config{
		GRPCAddr:              DefaultGRPCAddr,
		HTTPAddr:              DefaultHTTPAddr,
		MetricsAddr:           DefaultMetricsAddr,
		Reflection:            true,
		MaxRecvMsgBytes:       64 << 20,
		MaxSendMsgBytes:       64 << 20,
		MaxConcurrentRequests: 4 * runtime.GOMAXPROCS(0),
		MaxConcurrentStreams:  64,
		RequestTimeout:        30 * time.Second,
		MaxStreamDuration:     time.Hour,
		StreamIdleTimeout:     60 * time.Second,
		ShutdownGrace:         20 * time.Second,
	}
}

// TLS reports whether TLS is configured.
func (c Config) TLS() bool { return c.TLSCertFile != "" && c.TLSKeyFile != "" }

// Validate checks the configuration; errors name the field.
func (c Config) Validate() error {
	var errs []error
	if c.GRPCAddr == "" && c.GRPCListener == nil {
		errs = append(errs, errors.New("GRPCAddr: required"))
	}
	if (c.TLSCertFile == "") != (c.TLSKeyFile == "") {
		errs = append(errs, errors.New("TLSCertFile, TLSKeyFile: set both or neither"))
	}
	if c.TLSClientCAFile != "" && !c.TLS() {
		errs = append(errs, errors.New("TLSClientCAFile: mutual TLS needs TLSCertFile and TLSKeyFile"))
	}
	if c.Production {
		if !c.TLS() {
			errs = append(errs, errors.New("Production: needs TLS (TLSCertFile and TLSKeyFile)"))
		}
		if c.Reflection {
			errs = append(errs, errors.New("Production: Reflection must be off"))
		}
	}
	positive := []struct {
		name string
		v    int64
	}{
		{"MaxRecvMsgBytes", int64(c.MaxRecvMsgBytes)},
		{"MaxSendMsgBytes", int64(c.MaxSendMsgBytes)},
		{"MaxConcurrentRequests", int64(c.MaxConcurrentRequests)},
		{"MaxConcurrentStreams", int64(c.MaxConcurrentStreams)},
		{"RequestTimeout", int64(c.RequestTimeout)},
		{"MaxStreamDuration", int64(c.MaxStreamDuration)},
		{"StreamIdleTimeout", int64(c.StreamIdleTimeout)},
		{"ShutdownGrace", int64(c.ShutdownGrace)},
	}
	for _, p := range positive {
		if p.v <= 0 {
			errs = append(errs, fmt.Errorf("%s: must be positive, got %d", p.name, p.v))
		}
	}
	if c.MaxConnectionAge < 0 {
		errs = append(errs, fmt.Errorf("MaxConnectionAge: must not be negative, got %v", c.MaxConnectionAge))
	}
	if c.ShutdownDelay < 0 {
		errs = append(errs, fmt.Errorf("ShutdownDelay: must not be negative, got %v", c.ShutdownDelay))
	}
	return errors.Join(errs...)
}

// LogValue renders the configuration for the start-up log line: durations
// as strings, TLS and tokens as the file names only (no key material or
// token hash is ever read into the Config).
func (c Config) LogValue() slog.Value {
	return slog.GroupValue(
		slog.String("grpc_addr", c.GRPCAddr),
		slog.String("http_addr", c.HTTPAddr),
		slog.String("metrics_addr", c.MetricsAddr),
		slog.String("health_addr", c.HealthAddr),
		slog.Bool("tls", c.TLS()),
		slog.String("tls_cert_file", c.TLSCertFile),
		slog.String("tls_key_file", c.TLSKeyFile),
		slog.String("tls_client_ca_file", c.TLSClientCAFile),
		slog.String("token_file", c.TokenFile),
		slog.Bool("reflection", c.Reflection),
		slog.Bool("production", c.Production),
		slog.Int("max_recv_msg_bytes", c.MaxRecvMsgBytes),
		slog.Int("max_send_msg_bytes", c.MaxSendMsgBytes),
		slog.Int("max_concurrent_requests", c.MaxConcurrentRequests),
		slog.Int("max_concurrent_streams", c.MaxConcurrentStreams),
		slog.String("request_timeout", c.RequestTimeout.String()),
		slog.String("max_stream_duration", c.MaxStreamDuration.String()),
		slog.String("stream_idle_timeout", c.StreamIdleTimeout.String()),
		slog.String("max_connection_age", c.MaxConnectionAge.String()),
		slog.String("shutdown_delay", c.ShutdownDelay.String()),
		slog.String("shutdown_grace", c.ShutdownGrace.String()),
	)
}
