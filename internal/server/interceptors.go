package server

import (
	"context"
	"crypto/rand"
	"encoding/hex"
	"fmt"
	"log/slog"
	"runtime/debug"
	"strings"
	"time"

	middleware "github.com/grpc-ecosystem/go-grpc-middleware/v2"
	"github.com/grpc-ecosystem/go-grpc-middleware/v2/interceptors"
	"github.com/grpc-ecosystem/go-grpc-middleware/v2/interceptors/logging"
	"github.com/grpc-ecosystem/go-grpc-middleware/v2/interceptors/recovery"
	"github.com/grpc-ecosystem/go-grpc-middleware/v2/interceptors/selector"
	"google.golang.org/genproto/googleapis/rpc/errdetails"
	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/metadata"
	"google.golang.org/grpc/status"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
)

// requestIDKey is the metadata key (gRPC) and, canonicalised, the header
// (HTTP) carrying a request id in both directions.
const requestIDKey = "x-request-id"

type requestIDCtxKey struct{}

// withRequestID returns ctx carrying id.
func withRequestID(ctx context.Context, id string) context.Context {
	return context.WithValue(ctx, requestIDCtxKey{}, id)
}

// requestIDFrom returns the request id in ctx, or "" when there is none.
func requestIDFrom(ctx context.Context) string {
	id, _ := ctx.Value(requestIDCtxKey{}).(string)
	return id
}

// RequestID returns the request id of a call or HTTP request being handled
// by the server (taken from x-request-id or generated), or "".
func RequestID(ctx context.Context) string { return requestIDFrom(ctx) }

// newRequestID returns 16 random bytes in hex.
func newRequestID() string {
	var b [16]byte
	_, _ = rand.Read(b[:]) // crypto/rand.Read never fails (Go ≥ 1.24)
	return hex.EncodeToString(b[:])
}

// acceptRequestID returns id when it is a sane client-chosen request id
// (1–128 characters of [A-Za-z0-9._:/+=-]), else a new one. The check keeps
// log lines and headers clean of whatever a client sends.
func acceptRequestID(id string) string {
	if id == "" || len(id) > 128 {
		return newRequestID()
	}
	for i := 0; i < len(id); i++ {
		c := id[i]
		ok := c >= 'a' && c <= 'z' || c >= 'A' && c <= 'Z' || c >= '0' && c <= '9' || strings.IndexByte("._:/+=-", c) >= 0
		if !ok {
			return newRequestID()
		}
	}
	return id
}

func incomingRequestID(ctx context.Context) string {
	if md, ok := metadata.FromIncomingContext(ctx); ok {
		if v := md.Get(requestIDKey); len(v) > 0 {
			return acceptRequestID(v[0])
		}
	}
	return newRequestID()
}

// unaryRequestID takes the x-request-id metadata (or generates one), puts it
// in the context and the log fields, and echoes it: in the response header
// on success, in the trailer on error. (Header metadata on an error would
// turn a trailers-only answer into headers + trailers, which commits the
// call and so stops the client's retry policy from retrying UNAVAILABLE.)
func unaryRequestID(ctx context.Context, req any, _ *grpc.UnaryServerInfo, handler grpc.UnaryHandler) (any, error) {
	id := incomingRequestID(ctx)
	ctx = logging.InjectFields(withRequestID(ctx, id), callFields(ctx, id))
	resp, err := handler(ctx, req)
	if err == nil {
		_ = grpc.SetHeader(ctx, metadata.Pairs(requestIDKey, id))
	} else {
		_ = grpc.SetTrailer(ctx, metadata.Pairs(requestIDKey, id))
	}
	return resp, err
}

// callFields are the log fields of a call: the request id and, when the
// call was authenticated, the token's name.
func callFields(ctx context.Context, id string) logging.Fields {
	f := logging.Fields{"request_id", id}
	if p := principalFrom(ctx); p != "" {
		f = append(f, "auth.token", p)
	}
	return f
}

// streamRequestID is unaryRequestID for streams.
func streamRequestID(srv any, ss grpc.ServerStream, _ *grpc.StreamServerInfo, handler grpc.StreamHandler) error {
	id := incomingRequestID(ss.Context())
	w := middleware.WrapServerStream(ss)
	w.WrappedContext = logging.InjectFields(withRequestID(ss.Context(), id), callFields(ss.Context(), id))
	_ = ss.SetHeader(metadata.Pairs(requestIDKey, id))
	return handler(srv, w)
}

// grpcLogger adapts slog to the logging interceptor. For INVALID_ARGUMENT
// it drops the error text (validation messages may quote sample values:
// capture data) and keeps the field paths and reasons added by
// errorFields.
func grpcLogger(l *slog.Logger) logging.Logger {
	return logging.LoggerFunc(func(ctx context.Context, lvl logging.Level, msg string, fields ...any) {
		invalid := false
		for i := 0; i+1 < len(fields); i += 2 {
			if k, _ := fields[i].(string); k == "grpc.code" {
				invalid = fields[i+1] == codes.InvalidArgument.String()
			}
		}
		attrs := make([]any, 0, len(fields))
		for i := 0; i+1 < len(fields); i += 2 {
			if k, _ := fields[i].(string); invalid && k == "grpc.error" {
				continue
			}
			attrs = append(attrs, fields[i], fields[i+1])
		}
		l.Log(ctx, slog.Level(lvl), msg, attrs...)
	})
}

// errorFields adds the field paths and reasons of a BadRequest detail.
func errorFields(err error) logging.Fields {
	st, ok := status.FromError(err)
	if !ok {
		return nil
	}
	for _, d := range st.Details() {
		if br, ok := d.(*errdetails.BadRequest); ok {
			var fs, rs []string
			for _, v := range br.GetFieldViolations() {
				fs = append(fs, v.GetField())
				rs = append(rs, v.GetReason())
			}
			return logging.Fields{"grpc.error_fields", strings.Join(fs, ","), "grpc.error_reasons", strings.Join(rs, ",")}
		}
	}
	return nil
}

// recovered turns a panic into INTERNAL, counting and logging it (message
// and stack, no request data).
func (s *Server) recovered(ctx context.Context, p any) error {
	s.metrics.panics.Inc()
	id := requestIDFrom(ctx)
	s.log.LogAttrs(ctx, slog.LevelError, "panic recovered",
		slog.String("request_id", id), slog.String("panic", fmt.Sprint(p)), slog.String("stack", string(debug.Stack())))
	return status.Errorf(codes.Internal, "internal error (request id %s)", id)
}

// limiter holds the slots of the concurrency limits. Acquiring never
// blocks: a full limit is refused at once.
type limiter struct {
	requests chan struct{}
	streams  chan struct{}
}

func newLimiter(requests, streams int) *limiter {
	return &limiter{requests: make(chan struct{}, requests), streams: make(chan struct{}, streams)}
}

func tryAcquire(c chan struct{}) bool {
	select {
	case c <- struct{}{}:
		return true
	default:
		return false
	}
}

// retryAfter is the retry hint sent with RESOURCE_EXHAUSTED (RetryInfo,
// and Retry-After over HTTP).
const retryAfter = time.Second

func (s *Server) busyRequests() error {
	s.metrics.rejected.WithLabelValues(limitRequests).Inc()
	return resourceExhausted(retryAfter, "server busy: %d analyses in progress, the limit; retry later", cap(s.limits.requests))
}

func (s *Server) busyStreams() error {
	s.metrics.rejected.WithLabelValues(limitStreams).Inc()
	return resourceExhausted(retryAfter, "server busy: %d streams open, the limit; retry later", cap(s.limits.streams))
}

// unaryLimit releases the call's concurrency slot (taken by the tap) when
// the handler returns, and applies the default deadline. A call that did
// not pass the tap (none does over gRPC) takes a slot here.
func (s *Server) unaryLimit(ctx context.Context, req any, _ *grpc.UnaryServerInfo, handler grpc.UnaryHandler) (any, error) {
	sl := slotFrom(ctx)
	if sl == nil {
		if !tryAcquire(s.limits.requests) {
			return nil, s.busyRequests()
		}
		sl = &slot{pool: s.limits.requests}
	}
	defer sl.release()
	if _, ok := ctx.Deadline(); !ok {
		var cancel context.CancelFunc
		ctx, cancel = context.WithTimeout(ctx, s.cfg.RequestTimeout)
		defer cancel()
	}
	return handler(ctx, req)
}

// streamLimit is unaryLimit for streams (no default deadline: streams
// have their idle and duration limits).
func (s *Server) streamLimit(srv any, ss grpc.ServerStream, _ *grpc.StreamServerInfo, handler grpc.StreamHandler) error {
	sl := slotFrom(ss.Context())
	if sl == nil {
		if !tryAcquire(s.limits.streams) {
			return s.busyStreams()
		}
		sl = &slot{pool: s.limits.streams}
	}
	defer sl.release()
	return handler(srv, ss)
}

// kinematicsOnly selects the KinematicsService methods, so that health
// checks and reflection are never limited.
var kinematicsOnly = selector.MatchFunc(func(_ context.Context, c interceptors.CallMeta) bool {
	return c.Service == kinchainv1.KinematicsService_ServiceDesc.ServiceName
})

// interceptors returns the gRPC server options installing the chains, in
// order: request id → logging → metrics → recovery → limits/deadline.
// Recovery sits inside logging and metrics so a panic is logged and counted
// as the INTERNAL it becomes.
func (s *Server) interceptors() []grpc.ServerOption {
	logOpts := []logging.Option{
		logging.WithLogOnEvents(logging.FinishCall),
		logging.WithErrorFields(errorFields),
	}
	lg := grpcLogger(s.log)
	rep := s.metrics.grpcReportable()
	rec := recovery.WithRecoveryHandlerContext(s.recovered)
	return []grpc.ServerOption{
		grpc.ChainUnaryInterceptor(
			unaryRequestID,
			logging.UnaryServerInterceptor(lg, logOpts...),
			interceptors.UnaryServerInterceptor(rep),
			recovery.UnaryServerInterceptor(rec),
			selector.UnaryServerInterceptor(s.unaryLimit, kinematicsOnly),
		),
		grpc.ChainStreamInterceptor(
			streamRequestID,
			logging.StreamServerInterceptor(lg, logOpts...),
			interceptors.StreamServerInterceptor(rep),
			recovery.StreamServerInterceptor(rec),
			selector.StreamServerInterceptor(s.streamLimit, kinematicsOnly),
		),
	}
}
