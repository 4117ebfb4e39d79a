package server

import (
	"context"
	"errors"
	"io"
	"time"

	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/validate"
)

// The StreamCapture protocol, as enforced here:
//
//   - The first message must be a header; a batch first, or a message with
//     neither set, is INVALID_ARGUMENT naming "message". A second header is
//     INVALID_ARGUMENT naming "header". A bad header or batch is
//     INVALID_ARGUMENT with the session's field violations under "header."
//     or "batch.". These errors end the stream without a summary.
//   - A message that does not parse, or that would decode into far more
//     memory than its size, is INVALID_ARGUMENT naming "message".
//   - Responses returned by a Push are sent at once, in order. A client
//     that reads none for StreamIdleTimeout while responses wait is ended
//     with DEADLINE_EXCEEDED.
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

// recvResult is one received message, decoded, or the error ending the
// receiving.
type recvResult struct {
	msg *kinchainv1.StreamCaptureRequest
	err error
}

// runStream runs one StreamCapture call. The concurrent-streams limit is
// applied before this runs (admission in the tap, see admission.go).
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
//
// Responses go through a sender goroutine with a small queue, so that a
// client that stops reading (its flow-control window full, Send blocked)
// cannot hold the stream past the limits: when the queue accepts nothing
// for StreamIdleTimeout the stream ends with DEADLINE_EXCEEDED. Every
// ending except the client's own cancellation first waits (under the same
// limit) until the queued responses are sent, so none is lost.
func (s *Server) streamLoop(ss kinchainv1.KinematicsService_StreamCaptureServer) (string, error) {
	ctx := ss.Context()

	// One goroutine receives and decodes; it stops when the call ends
	// (done closed, or RecvMsg failing once the handler has returned and
	// gRPC cancelled the stream).
	msgs := make(chan recvResult)
	done := make(chan struct{})
	defer close(done)
	go func() {
		for {
			var raw rawMessage
			err := ss.RecvMsg(&raw)
			var m *kinchainv1.StreamCaptureRequest
			if err == nil {
				m, err = decodeStreamRequest(raw.b)
				raw.free()
			}
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

	out := s.newSender(ss)
	defer out.stop()
	stall := s.cfg.StreamIdleTimeout
	// end waits for the queued responses, then yields the final status.
	end := func(reason string, final error) (string, error) {
		if err := out.finish(ctx, stall); err != nil {
			return s.sendFailed(ctx, err)
		}
		return reason, final
	}
	// send queues responses; ok is false when the stream must end.
	send := func(rs []*kinchainv1.StreamCaptureResponse) (string, error, bool) {
		if err := out.enqueue(ctx, rs, stall); err != nil {
			r, e := s.sendFailed(ctx, err)
			return r, e, false
		}
		return "", nil, true
	}

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
					return end(streamEndError, fieldViolation("header", "HEADER_REQUIRED", "the stream was closed before its header was sent"))
				}
				if reason, err, ok := send(sess.Close()); !ok {
					return reason, err
				}
				return end(streamEndClient, nil)
			}
			if r.err != nil {
				var ve *validate.Error
				if errors.As(r.err, &ve) {
					return end(streamEndError, s.toStatus(ctx, r.err, scopeStream))
				}
				return streamEndCanceled, s.sendError(ctx, r.err)
			}
			idle.Reset(s.cfg.StreamIdleTimeout)
			switch m := r.msg.GetMessage().(type) {
			case *kinchainv1.StreamCaptureRequest_Header:
				if sess != nil {
					return end(streamEndError, fieldViolation("header", "DUPLICATE_HEADER", "a second header was sent; a stream has one header, as its first message"))
				}
				if m.Header == nil {
					return end(streamEndError, fieldViolation("header", "MISSING_FIELD", "empty header"))
				}
				ns, err := s.streams(m.Header)
				if err != nil {
					return end(streamEndError, s.toStatus(ctx, err, scopeHeader))
				}
				sess = ns
			case *kinchainv1.StreamCaptureRequest_Batch:
				if sess == nil {
					return end(streamEndError, fieldViolation("message", "HEADER_REQUIRED", "the first message must be a header, got a batch"))
				}
				rs, err := sess.Push(m.Batch)
				if reason, serr, ok := send(rs); !ok {
					return reason, serr
				}
				if err != nil {
					return end(streamEndError, s.toStatus(ctx, err, scopeBatch))
				}
			default:
				return end(streamEndError, fieldViolation("message", "MISSING_FIELD", "set header or batch"))
			}
		case <-idle.C:
			return s.flush(ctx, out, sess, stall, streamEndIdle, status.Errorf(codes.DeadlineExceeded,
				"stream idle for %v (the server's idle limit); reports so far were sent", s.cfg.StreamIdleTimeout))
		case <-life.C:
			return s.flush(ctx, out, sess, stall, streamEndDuration, status.Errorf(codes.DeadlineExceeded,
				"stream open for %v (the server's maximum stream duration); reports so far were sent", s.cfg.MaxStreamDuration))
		case <-s.draining:
			return s.flush(ctx, out, sess, stall, streamEndShutdown, status.Error(codes.Unavailable,
				"server shutting down; the summary covers the samples received so far, open a new stream to continue"))
		case <-ctx.Done():
			return streamEndCanceled, status.FromContextError(ctx.Err()).Err()
		}
	}
}

// flush closes sess (when open), sends what it returns and everything
// queued, and then yields final as the call's status.
func (s *Server) flush(ctx context.Context, out *sender, sess StreamSession, stall time.Duration, reason string, final error) (string, error) {
	if sess != nil {
		if err := out.enqueue(ctx, sess.Close(), stall); err != nil {
			return s.sendFailed(ctx, err)
		}
	}
	if err := out.finish(ctx, stall); err != nil {
		return s.sendFailed(ctx, err)
	}
	return reason, final
}

// errStalled: the client read nothing for the stall limit.
var errStalled = errors.New("client not reading")

// sendFailed maps a sender failure to the end reason and status.
func (s *Server) sendFailed(ctx context.Context, err error) (string, error) {
	if errors.Is(err, errStalled) {
		return streamEndIdle, status.Errorf(codes.DeadlineExceeded,
			"the client read no response for %v (the server's idle limit); the stream is ended", s.cfg.StreamIdleTimeout)
	}
	return streamEndCanceled, s.sendError(ctx, err)
}

// sender sends a stream's responses from its own goroutine, in order.
type sender struct {
	s     *Server
	ss    kinchainv1.KinematicsService_StreamCaptureServer
	queue chan *kinchainv1.StreamCaptureResponse
	sent  chan struct{} // a Send completed (capacity 1, never blocks the sender)
	quit  chan struct{} // closed by stop: send nothing more
	exit  chan struct{} // closed when the goroutine has returned
	err   error         // the Send error that stopped it; read after exit
	once  bool          // queue closed
}

// senderQueue is how many responses may wait for a slow client.
const senderQueue = 16

func (s *Server) newSender(ss kinchainv1.KinematicsService_StreamCaptureServer) *sender {
	o := &sender{s: s, ss: ss, queue: make(chan *kinchainv1.StreamCaptureResponse, senderQueue),
		sent: make(chan struct{}, 1), quit: make(chan struct{}), exit: make(chan struct{})}
	go o.run()
	return o
}

func (o *sender) run() {
	defer close(o.exit)
	for r := range o.queue {
		select {
		case <-o.quit:
			return
		default:
		}
		if err := o.ss.Send(r); err != nil {
			o.err = err
			return
		}
		select {
		case o.sent <- struct{}{}:
		default:
		}
		if sum := r.GetSummary(); sum != nil {
			o.s.metrics.samples.Add(float64(sum.GetSamples()))
			o.s.metrics.swings.Add(float64(sum.GetSwings()))
		}
	}
}

// enqueue queues rs in order. It fails with errStalled when for stall
// neither the queue accepts a response nor the sender sends one, with the
// Send error when the sender stopped, or with the context's error.
func (o *sender) enqueue(ctx context.Context, rs []*kinchainv1.StreamCaptureResponse, stall time.Duration) error {
	if len(rs) == 0 {
		return nil
	}
	t := time.NewTimer(stall)
	defer t.Stop()
	for _, r := range rs {
	wait:
		select {
		case o.queue <- r:
			t.Reset(stall)
		case <-o.sent:
			t.Reset(stall)
			goto wait
		case <-o.exit:
			if err := o.failure(); err != nil {
				return err
			}
			return errors.New("stream sender stopped")
		case <-t.C:
			return errStalled
		case <-ctx.Done():
			return ctx.Err()
		}
	}
	return nil
}

// finish closes the queue and waits until everything queued is sent; it
// fails with errStalled when nothing is sent for stall.
func (o *sender) finish(ctx context.Context, stall time.Duration) error {
	if !o.once {
		o.once = true
		close(o.queue)
	}
	t := time.NewTimer(stall)
	defer t.Stop()
	for {
		select {
		case <-o.exit:
			return o.failure()
		case <-o.sent:
			t.Reset(stall)
		case <-t.C:
			return errStalled
		case <-ctx.Done():
			return ctx.Err()
		}
	}
}

func (o *sender) failure() error {
	if o.err != nil {
		return o.err
	}
	return nil
}

// stop tells the sender to send nothing more. It does not wait: a Send
// blocked on a client that does not read returns once the handler has
// returned and gRPC has ended the stream.
func (o *sender) stop() {
	close(o.quit)
	if !o.once {
		o.once = true
		close(o.queue)
	}
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
