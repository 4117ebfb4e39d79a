package server_test

import (
	"context"
	"errors"
	"io"
	"math"
	"testing"
	"time"

	"go.uber.org/goleak"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/server"
)

func header(rate float64) *kinchainv1.StreamCaptureRequest {
	return &kinchainv1.StreamCaptureRequest{Message: &kinchainv1.StreamCaptureRequest_Header{Header: &kinchainv1.StreamHeader{
		CaptureId: "live", RateHz: rate, Segments: []kinchainv1.Segment{kinchainv1.Segment_SEGMENT_PELVIS},
	}}}
}

func batch(t0 float64, n int) *kinchainv1.StreamCaptureRequest {
	tr := &kinchainv1.Track{Segment: kinchainv1.Segment_SEGMENT_PELVIS}
	for i := 0; i < n; i++ {
		tr.TimeS = append(tr.TimeS, t0+float64(i)/100)
		tr.Qw, tr.Qx, tr.Qy, tr.Qz = append(tr.Qw, 1), append(tr.Qx, 0), append(tr.Qy, 0), append(tr.Qz, 0)
	}
	return &kinchainv1.StreamCaptureRequest{Message: &kinchainv1.StreamCaptureRequest_Batch{Batch: &kinchainv1.SampleBatch{Tracks: []*kinchainv1.Track{tr}}}}
}

// recvAll reads responses until the stream ends and returns them with the
// final status (nil for OK).
func recvAll(st kinchainv1.KinematicsService_StreamCaptureClient) ([]*kinchainv1.StreamCaptureResponse, error) {
	var out []*kinchainv1.StreamCaptureResponse
	for {
		r, err := st.Recv()
		if errors.Is(err, io.EOF) {
			return out, nil
		}
		if err != nil {
			return out, err
		}
		out = append(out, r)
	}
}

func TestStreamProtocol(t *testing.T) {
	ts := startServer(t, testConfig(), &fakeAnalyzer{}, fakeStreams, true)
	c := ts.client()

	t.Run("normal", func(t *testing.T) {
		st, err := c.StreamCapture(context.Background())
		if err != nil {
			t.Fatal(err)
		}
		if err := st.Send(header(100)); err != nil {
			t.Fatal(err)
		}
		for i := 0; i < 3; i++ {
			if err := st.Send(batch(float64(i)*0.1, 10)); err != nil {
				t.Fatal(err)
			}
			// Events come as soon as the batch is pushed, before the close.
			r, err := st.Recv()
			if err != nil || r.GetEvent() == nil {
				t.Fatalf("batch %d: %v %v, want an event", i, r, err)
			}
		}
		if err := st.CloseSend(); err != nil {
			t.Fatal(err)
		}
		out, err := recvAll(st)
		if err != nil {
			t.Fatalf("after half-close: %v, want OK", err)
		}
		if len(out) != 2 || out[0].GetSwing() == nil || out[1].GetSummary().GetSamples() != 30 {
			t.Errorf("after half-close got %v, want a swing report and a summary of 30 samples", out)
		}
	})

	cases := []struct {
		name  string
		msgs  []*kinchainv1.StreamCaptureRequest
		field string
	}{
		{"batch before header", []*kinchainv1.StreamCaptureRequest{batch(0, 5)}, "message"},
		{"second header", []*kinchainv1.StreamCaptureRequest{header(100), batch(0, 5), header(100)}, "header"},
		{"empty message", []*kinchainv1.StreamCaptureRequest{{}}, "message"},
		{"bad header", []*kinchainv1.StreamCaptureRequest{header(0)}, "header.rate_hz"},
		{"bad batch", []*kinchainv1.StreamCaptureRequest{header(100), func() *kinchainv1.StreamCaptureRequest {
			b := batch(0, 5)
			b.GetBatch().Tracks[0].TimeS[3] = math.NaN()
			return b
		}()}, "batch.tracks[0].time_s[3]"},
		{"closed before header", nil, "header"},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			st, err := c.StreamCapture(context.Background())
			if err != nil {
				t.Fatal(err)
			}
			for _, m := range tc.msgs {
				if err := st.Send(m); err != nil {
					break // the server may already have ended the call
				}
			}
			_ = st.CloseSend()
			_, err = recvAll(st)
			if status.Code(err) != codes.InvalidArgument {
				t.Fatalf("%v, want InvalidArgument", err)
			}
			if f := badRequest(t, err).GetFieldViolations()[0].GetField(); f != tc.field {
				t.Errorf("field = %q, want %q (%v)", f, tc.field, err)
			}
		})
	}
}

func TestStreamDisabled(t *testing.T) {
	ts := startServer(t, testConfig(), &fakeAnalyzer{}, nil, true)
	st, err := ts.client().StreamCapture(context.Background())
	if err != nil {
		t.Fatal(err)
	}
	_ = st.Send(header(100))
	if _, err := recvAll(st); status.Code(err) != codes.Unimplemented {
		t.Errorf("%v, want Unimplemented", err)
	}
}

func TestStreamIdleAndMaxDuration(t *testing.T) {
	cfg := testConfig()
	cfg.StreamIdleTimeout = 100 * time.Millisecond
	ts := startServer(t, cfg, &fakeAnalyzer{}, fakeStreams, true)
	st, err := ts.client().StreamCapture(context.Background())
	if err != nil {
		t.Fatal(err)
	}
	_ = st.Send(header(100))
	_ = st.Send(batch(0, 10))
	out, err := recvAll(st) // the client now says nothing
	if status.Code(err) != codes.DeadlineExceeded {
		t.Fatalf("idle: %v, want DeadlineExceeded", err)
	}
	if len(out) == 0 || out[len(out)-1].GetSummary().GetSamples() != 10 {
		t.Errorf("idle: got %v, want the flushed summary of 10 samples last", out)
	}

	cfg = testConfig()
	cfg.MaxStreamDuration = 150 * time.Millisecond
	ts2 := startServer(t, cfg, &fakeAnalyzer{}, fakeStreams, true)
	st2, err := ts2.client().StreamCapture(context.Background())
	if err != nil {
		t.Fatal(err)
	}
	_ = st2.Send(header(100))
	// Keep sending (so the idle limit never fires) until the server ends it.
	go func() {
		for i := 0; i < 200; i++ {
			if st2.Send(batch(float64(i), 1)) != nil {
				return
			}
			time.Sleep(10 * time.Millisecond)
		}
	}()
	out, err = recvAll(st2)
	if status.Code(err) != codes.DeadlineExceeded {
		t.Fatalf("max duration: %v, want DeadlineExceeded", err)
	}
	if len(out) == 0 || out[len(out)-1].GetSummary() == nil {
		t.Errorf("max duration: last response %v, want a summary", out)
	}
}

func TestStreamLimit(t *testing.T) {
	cfg := testConfig()
	cfg.MaxConcurrentStreams = 1
	ts := startServer(t, cfg, &fakeAnalyzer{}, fakeStreams, true)
	c := ts.client()
	st1, err := c.StreamCapture(context.Background())
	if err != nil {
		t.Fatal(err)
	}
	_ = st1.Send(header(100))
	_ = st1.Send(batch(0, 2))
	if _, err := st1.Recv(); err != nil { // the first stream is surely open now
		t.Fatal(err)
	}
	st2, err := c.StreamCapture(context.Background())
	if err != nil {
		t.Fatal(err)
	}
	_ = st2.Send(header(100))
	if _, err := recvAll(st2); status.Code(err) != codes.ResourceExhausted {
		t.Errorf("second stream: %v, want ResourceExhausted", err)
	}
	_ = st1.CloseSend()
	if _, err := recvAll(st1); err != nil {
		t.Errorf("first stream: %v", err)
	}
}

// TestStreamShutdown: a server shutting down flushes open streams (summary)
// and ends them with UNAVAILABLE.
func TestStreamShutdown(t *testing.T) {
	ts := startServer(t, testConfig(), &fakeAnalyzer{}, fakeStreams, false)
	st, err := ts.client().StreamCapture(context.Background())
	if err != nil {
		t.Fatal(err)
	}
	_ = st.Send(header(100))
	_ = st.Send(batch(0, 7))
	if _, err := st.Recv(); err != nil {
		t.Fatal(err)
	}
	stopped := make(chan error, 1)
	go func() { stopped <- ts.stop() }()
	out, err := recvAll(st)
	if status.Code(err) != codes.Unavailable {
		t.Errorf("%v, want Unavailable", err)
	}
	if len(out) == 0 || out[len(out)-1].GetSummary().GetSamples() != 7 {
		t.Errorf("got %v, want the summary of 7 samples", out)
	}
	if err := <-stopped; err != nil {
		t.Errorf("Serve: %v", err)
	}
}

// TestNoLeaksOnClientDisconnect: a client that cancels mid-stream, or a
// unary call cancelled mid-analysis, leaves no goroutine behind once the
// server has stopped.
func TestNoLeaksOnClientDisconnect(t *testing.T) {
	opt := goleak.IgnoreCurrent()
	func() {
		fa := &fakeAnalyzer{gate: make(chan struct{}), started: make(chan struct{}, 1)}
		defer close(fa.gate)
		ts := startServer(t, testConfig(), fa, fakeStreams, false)
		conn := ts.conn()
		c := kinchainv1.NewKinematicsServiceClient(conn)

		ctx, cancel := context.WithCancel(context.Background())
		st, err := c.StreamCapture(ctx)
		if err != nil {
			t.Fatal(err)
		}
		_ = st.Send(header(100))
		_ = st.Send(batch(0, 3))
		if _, err := st.Recv(); err != nil {
			t.Fatal(err)
		}
		cancel() // disconnect mid-stream
		if _, err := recvAll(st); status.Code(err) != codes.Canceled {
			t.Errorf("cancelled stream: %v", err)
		}

		uctx, ucancel := context.WithCancel(context.Background())
		done := make(chan error, 1)
		go func() {
			_, err := c.AnalyzeCapture(uctx, &kinchainv1.AnalyzeCaptureRequest{Capture: goodCapture("c", 20)})
			done <- err
		}()
		<-fa.started
		ucancel()
		if err := <-done; status.Code(err) != codes.Canceled {
			t.Errorf("cancelled unary: %v", err)
		}
		conn.Close()
		if err := ts.stop(); err != nil {
			t.Errorf("Serve: %v", err)
		}
	}()
	goleak.VerifyNone(t, opt)
}

var _ server.StreamFactory = fakeStreams
