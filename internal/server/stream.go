package server

import (
	"context"
	"errors"
	"io"
	"time"

	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
)

// The StreamCapture protocol, as enforced here:
//
//   - The first message must be a header; a batch first, or a message with
//     neither set, is INVALID_ARGUMENT naming "message". A second header is
//     INVALID_ARGUMENT naming "header". A bad header or batch is
//     INVALID_ARGUMENT with the session's field violations under "header."
//     or "batch.". These errors end the stream without a summary.
//   - Responses returned by a Push are sent at once, in order.
//   - The client's half-close ends the stream normally: the session is
//     closed, its remaining reports and summary are sent, status OK. A
//     half-close before any header is INVALID_ARGUMENT naming "header".
//   - Idle timeout (no message for Config.StreamIdleTimeout) and maximum
//     duration (Config.MaxStreamDuration): what is ready is flushed (the
//     session is closed and its reports and summary sent), then the stream
//     ends with DEADLINE_EXCEEDED saying which limit was hit.
//   - Server shutdown: the same flush, then UNAVAILABLE ("server shutting
//     down"), so the client knows the summary covers only what was sent and
//     that it may open a new stream elsewhere.
//   - The client's cancellation or deadline ends the stream at once
//     (CANCELED / DEADLINE_EXCEEDED) with nothing more sent.

// recvResult is one ss.Recv outcome.
type recvResult struct {
	msg *kinchainv1.StreamCaptureRequest
	err error
}

// runStream runs one StreamCapture call. The concurrent-streams limit is
// applied by the limits interceptor before this runs.
func (s *Server) runStream(ss kinchainv1.KinematicsService_StreamCaptureServer) error {
	if s.streams == nil {
		return status.Error(codes.Unimplemented, "streaming analysis is not enabled on this server")
	}
	s.metrics.liveStreams.Inc()
	defer s.metrics.liveStreams.Dec()
	reason, err := s.streamLoop(ss)
	s.metrics.streamsEnded.WithLabelValues(reason).Inc()
	return err
}

// streamLoop is runStream's body; it returns the end reason (a
// kinchain_streams_ended_total label) and the call's status.
func (s *Server) streamLoop(ss kinchainv1.KinematicsService_StreamCaptureServer) (string, error) {
	ctx := ss.Context()

	// One goroutine receives; it stops when the call ends (done closed, or
	// Recv failing once the handler has returned and gRPC cancelled the
	// stream).
	msgs := make(chan recvResult)
	done := make(chan struct{})
	defer close(done)
	go func() {
		for {
			m, err := ss.Recv()
			select {
			case msgs <- recvResult{m, err}:
			case <-done:
				return
			}
			if err != nil {
				return
			}
		}
	}()

	idle := time.NewTimer(s.cfg.StreamIdleTimeout)
	defer idle.Stop()
	life := time.NewTimer(s.cfg.MaxStreamDuration)
	defer life.Stop()

	var sess StreamSession
	for {
		select {
		case r := <-msgs:
			if errors.Is(r.err, io.EOF) {
				if sess == nil {
					return streamEndError, fieldViolation("header", "HEADER_REQUIRED", "the stream was closed before its header was sent")
				}
				if err := s.sendAll(ss, sess.Close()); err != nil {
					return streamEndCanceled, s.sendError(ctx, err)
				}
				return streamEndClient, nil
			}
			if r.err != nil {
				return streamEndCanceled, s.sendError(ctx, r.err)
			}
			idle.Reset(s.cfg.StreamIdleTimeout)
			switch m := r.msg.GetMessage().(type) {
			case *kinchainv1.StreamCaptureRequest_Header:
				if sess != nil {
					return streamEndError, fieldViolation("header", "DUPLICATE_HEADER", "a second header was sent; a stream has one header, as its first message")
				}
				if m.Header == nil {
					return streamEndError, fieldViolation("header", "MISSING_FIELD", "empty header")
				}
				ns, err := s.streams(m.Header)
				if err != nil {
					return streamEndError, s.toStatus(ctx, err, scopeHeader)
				}
				sess = ns
			case *kinchainv1.StreamCaptureRequest_Batch:
				if sess == nil {
					return streamEndError, fieldViolation("message", "HEADER_REQUIRED", "the first message must be a header, got a batch")
				}
				out, err := sess.Push(m.Batch)
				if serr := s.sendAll(ss, out); serr != nil {
					return streamEndCanceled, s.sendError(ctx, serr)
				}
				if err != nil {
					return streamEndError, s.toStatus(ctx, err, scopeBatch)
				}
			default:
				return streamEndError, fieldViolation("message", "MISSING_FIELD", "set header or batch")
			}
		case <-idle.C:
			return streamEndIdle, s.flush(ctx, ss, sess, status.Errorf(codes.DeadlineExceeded,
				"stream idle for %v (the server's idle limit); reports so far were sent", s.cfg.StreamIdleTimeout))
		case <-life.C:
			return streamEndDuration, s.flush(ctx, ss, sess, status.Errorf(codes.DeadlineExceeded,
				"stream open for %v (the server's maximum stream duration); reports so far were sent", s.cfg.MaxStreamDuration))
		case <-s.draining:
			return streamEndShutdown, s.flush(ctx, ss, sess, status.Error(codes.Unavailable,
				"server shutting down; the summary covers the samples received so far, open a new stream to continue"))
		case <-ctx.Done():
			return streamEndCanceled, status.FromContextError(ctx.Err()).Err()
		}
	}
}

// flush closes sess (when open), sends what it returns, and then yields
// final as the call's status.
func (s *Server) flush(ctx context.Context, ss kinchainv1.KinematicsService_StreamCaptureServer, sess StreamSession, final error) error {
	if sess != nil {
		if err := s.sendAll(ss, sess.Close()); err != nil {
			return s.sendError(ctx, err)
		}
	}
	return final
}

// sendAll sends responses in order, counting the samples and swings of a
// summary.
func (s *Server) sendAll(ss kinchainv1.KinematicsService_StreamCaptureServer, out []*kinchainv1.StreamCaptureResponse) error {
	for _, r := range out {
		if err := ss.Send(r); err != nil {
			return err
		}
		if sum := r.GetSummary(); sum != nil {
			s.metrics.samples.Add(float64(sum.GetSamples()))
			s.metrics.swings.Add(float64(sum.GetSwings()))
		}
	}
	return nil
}

// sendError is the status for a failed Send or Recv: the context's error
// when the call was cancelled, else the transport's error as is.
func (s *Server) sendError(ctx context.Context, err error) error {
	if ctx.Err() != nil {
		return status.FromContextError(ctx.Err()).Err()
	}
	if _, ok := status.FromError(err); ok {
		return err
	}
	return status.Error(codes.Unavailable, err.Error())
}
