// Package client dials kinchain's gRPC service with production defaults:
//
//   - DNS resolution with the round_robin balancer, so a target such as
//     "dns:///kinchain.golf.svc.cluster.local:7310" naming a Kubernetes
//     headless Service spreads calls over every replica (the resolver
//     re-resolves when connections drop, e.g. when the server's
//     max-connection-age closes them);
//   - keepalive pings every 30 s (the server permits one every 10 s), so
//     dead connections behind NATs and load balancers are noticed;
//   - a default per-call deadline for calls that have none;
//   - transparent retries of AnalyzeCapture on UNAVAILABLE (a replica
//     shutting down), which is safe because analysis is stateless;
//   - 64 MiB message limits, matching the server's defaults, and HTTP/2
//     flow-control windows of 4 MiB per stream / 16 MiB per connection so
//     a capture crosses in few round trips.
//
// Analyze is the typed helper for the common call:
//
//	c, err := client.New("dns:///kinchain:7310", client.Options{})
//	...
//	defer c.Close()
//	resp, err := c.Analyze(ctx, capture, &kinchainv1.AnalysisOptions{})
package client

import (
	"context"
	"crypto/tls"
	"errors"
	"time"

	"google.golang.org/grpc"
	"google.golang.org/grpc/credentials"
	"google.golang.org/grpc/credentials/insecure"
	"google.golang.org/grpc/keepalive"
	"google.golang.org/grpc/metadata"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
)

// Defaults used where Options fields are zero.
const (
	DefaultTimeout          = 60 * time.Second
	DefaultKeepaliveTime    = 30 * time.Second
	DefaultKeepaliveTimeout = 10 * time.Second
	DefaultMaxMsgBytes      = 64 << 20
)

// ServiceConfig is the gRPC service config the client installs: the
// round_robin balancer, and retries of AnalyzeCapture on UNAVAILABLE (up to
// 3 attempts, 0.1 s → 1 s backoff). StreamCapture is never retried: a
// stream's state lives on one replica.
const ServiceConfig = `{
  "loadBalancingConfig": [{"round_robin": {}}],
  "methodConfig": [{
    "name": [{"service": "kinchain.v1.KinematicsService", "method": "AnalyzeCapture"}],
    "retryPolicy": {
      "maxAttempts": 3,
      "initialBackoff": "0.1s",
      "maxBackoff": "1s",
      "backoffMultiplier": 2,
      "retryableStatusCodes": ["UNAVAILABLE"]
    }
  }]
}`

// Options tune a client; the zero value gives the defaults above over
// plaintext (for a server inside a trusted network or on loopback).
type Options struct {
	// TLS, when set, is used for transport security; nil means plaintext.
	TLS *tls.Config
	// Timeout is the deadline given to a unary call whose context has none
	// (default 60 s). A negative value turns the default deadline off.
	Timeout time.Duration
	// KeepaliveTime is the interval of keepalive pings (default 30 s; the
	// server refuses pings more often than every 10 s).
	KeepaliveTime time.Duration
	// KeepaliveTimeout is how long to wait for a ping's answer before the
	// connection is considered dead (default 10 s).
	KeepaliveTimeout time.Duration
	// MaxMsgBytes bounds messages sent and received (default 64 MiB).
	MaxMsgBytes int
	// DialOptions are appended after the defaults (and so win).
	DialOptions []grpc.DialOption
}

func (o Options) withDefaults() Options {
	if o.Timeout == 0 {
		o.Timeout = DefaultTimeout
	}
	if o.KeepaliveTime <= 0 {
		o.KeepaliveTime = DefaultKeepaliveTime
	}
	if o.KeepaliveTimeout <= 0 {
		o.KeepaliveTimeout = DefaultKeepaliveTimeout
	}
	if o.MaxMsgBytes <= 0 {
		o.MaxMsgBytes = DefaultMaxMsgBytes
	}
	return o
}

// DialOptions returns the dial options the client uses, for callers who
// build their own grpc.ClientConn.
func DialOptions(o Options) []grpc.DialOption {
	o = o.withDefaults()
	creds := insecure.NewCredentials()
	if o.TLS != nil {
		creds = credentials.NewTLS(o.TLS)
	}
	opts := []grpc.DialOption{
		grpc.WithTransportCredentials(creds),
		grpc.WithDefaultServiceConfig(ServiceConfig),
		// Captures are large: fixed flow-control windows and larger socket
		// buffers (the server uses the same values).
		grpc.WithInitialWindowSize(4 << 20),
		grpc.WithInitialConnWindowSize(16 << 20),
		grpc.WithReadBufferSize(256 << 10),
		grpc.WithWriteBufferSize(256 << 10),
		grpc.WithKeepaliveParams(keepalive.ClientParameters{
			Time:                o.KeepaliveTime,
			Timeout:             o.KeepaliveTimeout,
			PermitWithoutStream: true,
		}),
		grpc.WithDefaultCallOptions(
			grpc.MaxCallRecvMsgSize(o.MaxMsgBytes),
			grpc.MaxCallSendMsgSize(o.MaxMsgBytes),
			// Whole requests stay buffered until committed, so that a
			// retry can resend a capture larger than gRPC's 256 KiB default.
			grpc.MaxRetryRPCBufferSize(o.MaxMsgBytes),
		),
	}
	if o.Timeout > 0 {
		opts = append(opts, grpc.WithChainUnaryInterceptor(DefaultDeadline(o.Timeout)))
	}
	return append(opts, o.DialOptions...)
}

// DefaultDeadline is a unary client interceptor giving calls without a
// deadline one of d; calls that have a deadline keep theirs.
func DefaultDeadline(d time.Duration) grpc.UnaryClientInterceptor {
	return func(ctx context.Context, method string, req, reply any, cc *grpc.ClientConn, invoker grpc.UnaryInvoker, opts ...grpc.CallOption) error {
		if _, ok := ctx.Deadline(); !ok {
			var cancel context.CancelFunc
			ctx, cancel = context.WithTimeout(ctx, d)
			defer cancel()
		}
		return invoker(ctx, method, req, reply, cc, opts...)
	}
}

// Client is a connection to kinchain's service. It is safe for concurrent
// use; make one per target and share it.
type Client struct {
	conn *grpc.ClientConn
	svc  kinchainv1.KinematicsServiceClient
}

// New creates a client for target (any gRPC target; "dns:///host:port" for
// a headless Service, "host:port" uses DNS too). It does not connect until
// the first call.
func New(target string, o Options) (*Client, error) {
	if target == "" {
		return nil, errors.New("client: empty target")
	}
	conn, err := grpc.NewClient(target, DialOptions(o)...)
	if err != nil {
		return nil, err
	}
	return &Client{conn: conn, svc: kinchainv1.NewKinematicsServiceClient(conn)}, nil
}

// Analyze analyses a whole capture. opts may be nil (the defaults).
func (c *Client) Analyze(ctx context.Context, capture *kinchainv1.Capture, opts *kinchainv1.AnalysisOptions, callOpts ...grpc.CallOption) (*kinchainv1.AnalyzeCaptureResponse, error) {
	return c.svc.AnalyzeCapture(ctx, &kinchainv1.AnalyzeCaptureRequest{Capture: capture, Options: opts}, callOpts...)
}

// Stream opens a StreamCapture call: send a header, then batches; call
// CloseSend and read until io.EOF for the remaining reports and summary.
// Streams get no default deadline (they are long-lived); cancel ctx to end
// one.
func (c *Client) Stream(ctx context.Context, callOpts ...grpc.CallOption) (kinchainv1.KinematicsService_StreamCaptureClient, error) {
	return c.svc.StreamCapture(ctx, callOpts...)
}

// Service returns the generated client, for calls the helpers do not cover.
func (c *Client) Service() kinchainv1.KinematicsServiceClient { return c.svc }

// Conn returns the underlying connection (health checks, reflection).
func (c *Client) Conn() *grpc.ClientConn { return c.conn }

// Close closes the connection.
func (c *Client) Close() error { return c.conn.Close() }

// WithRequestID returns ctx with an x-request-id the server will log and
// echo (1–128 characters of [A-Za-z0-9._:/+=-]; anything else is replaced
// by a generated id).
func WithRequestID(ctx context.Context, id string) context.Context {
	return metadata.AppendToOutgoingContext(ctx, "x-request-id", id)
}
