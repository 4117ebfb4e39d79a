package server

import (
	"context"
	"strings"
	"sync"

	"google.golang.org/grpc/tap"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
)

// Admission of gRPC calls happens in the transport's tap, when a call's
// headers arrive and before a byte of its message is read: the bearer
// token is checked (when tokens are configured), the token's rate limit
// applied, and a slot of the concurrency limit taken (requests for
// AnalyzeCapture and any other KinematicsService method, streams for
// StreamCapture). A call refused there costs the server one header frame:
// its message is never read or decoded, so neither a flood of callers nor
// one without a token can make the server hold more than the admitted
// calls' messages. Health checks and reflection pass untouched.
//
// The slot is released when the handler returns (the limits interceptor)
// or when the call's stream ends, whichever comes first (context.AfterFunc
// on the stream's context, which gRPC cancels at the end of every stream,
// also one that never reaches a handler), and exactly once.
//
// Calls refused in the tap never reach the interceptors: they are counted
// in kinchain_requests_rejected_total, kinchain_auth_failures_total or
// kinchain_rate_limited_total, not in kinchain_grpc_requests_total, and not
// logged per call (a flood would flood the log).

// slot is one taken place of a concurrency limit.
type slot struct {
	once sync.Once
	pool chan struct{}
}

func (sl *slot) release() { sl.once.Do(func() { <-sl.pool }) }

type slotKey struct{}

func slotFrom(ctx context.Context) *slot {
	sl, _ := ctx.Value(slotKey{}).(*slot)
	return sl
}

var kinematicsService = kinchainv1.KinematicsService_ServiceDesc.ServiceName

// tap is the gRPC InTapHandle. gRPC calls it on the connection's reader
// goroutine with the transport's lock held, so it must not block: every
// step here is a hash, a comparison or a non-blocking channel operation.
func (s *Server) tap(ctx context.Context, info *tap.Info) (context.Context, error) {
	svc, method, _ := strings.Cut(strings.TrimPrefix(info.FullMethodName, "/"), "/")
	if svc != kinematicsService {
		return ctx, nil
	}
	var authz string
	if v := info.Header.Get("authorization"); len(v) > 0 {
		authz = v[0]
	}
	ctx, err := s.authorize(ctx, transportGRPC, authz)
	if err != nil {
		return nil, err
	}
	pool, busy := s.limits.requests, s.busyRequests
	if method == "StreamCapture" {
		pool, busy = s.limits.streams, s.busyStreams
	}
	if !tryAcquire(pool) {
		return nil, busy()
	}
	sl := &slot{pool: pool}
	context.AfterFunc(ctx, sl.release)
	return context.WithValue(ctx, slotKey{}, sl), nil
}
