package server_test

import (
	"bytes"
	"context"
	"fmt"
	"io"
	"log/slog"
	"math"
	"net"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/prometheus/client_golang/prometheus"
	"google.golang.org/grpc"
	"google.golang.org/grpc/credentials/insecure"
	"google.golang.org/grpc/test/bufconn"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/decode"
	"github.com/kinchain/kinchain/internal/server"
	"github.com/kinchain/kinchain/internal/validate"
)

// fakeAnalyzer is a test-only Analyzer for the server's plumbing. It runs
// the real decoder and validator (so bad input yields the real
// *validate.Error values) and answers with what it was given: the capture
// id, one TrackQuality per track with its sample count, and the options'
// speed and handedness echoed, so tests can tell that requests and options
// arrived intact. Special capture ids: "panic" panics; "internal" fails
// with an unclassified error. When gate is set every analysis waits for it
// to be closed (or for its context), after signalling started.
type fakeAnalyzer struct {
	gate    chan struct{}
	started chan struct{}
}

func (f *fakeAnalyzer) wait(ctx context.Context) error {
	if f.started != nil {
		f.started <- struct{}{}
	}
	if f.gate == nil {
		return nil
	}
	select {
	case <-f.gate:
		return nil
	case <-ctx.Done():
		return ctx.Err()
	}
}

func (f *fakeAnalyzer) Analyze(ctx context.Context, req *kinchainv1.AnalyzeCaptureRequest) (*kinchainv1.AnalyzeCaptureResponse, error) {
	switch req.GetCapture().GetCaptureId() {
	case "panic":
		panic("test panic")
	case "internal":
		return nil, fmt.Errorf("disk on fire")
	}
	if err := f.wait(ctx); err != nil {
		return nil, err
	}
	if _, err := validate.Request(req, validate.Limits{}, nil); err != nil {
		return nil, err
	}
	return echo(req.GetCapture(), req.GetOptions()), nil
}

func (f *fakeAnalyzer) AnalyzeCSV(ctx context.Context, r io.Reader, opts *kinchainv1.AnalysisOptions) (*kinchainv1.AnalyzeCaptureResponse, error) {
	if err := f.wait(ctx); err != nil {
		return nil, err
	}
	pc, loc, err := decode.CSV(r, validate.Limits{})
	if err != nil {
		return nil, err
	}
	if _, err := validate.Capture(pc, validate.Limits{}, loc); err != nil {
		return nil, err
	}
	if err := validate.Options(opts); err != nil {
		return nil, err
	}
	return echo(pc, opts), nil
}

func echo(c *kinchainv1.Capture, o *kinchainv1.AnalysisOptions) *kinchainv1.AnalyzeCaptureResponse {
	resp := &kinchainv1.AnalyzeCaptureResponse{
		CaptureId:  c.GetCaptureId(),
		Speed:      o.GetSpeed(),
		Handedness: o.GetHandedness(),
		Quality:    &kinchainv1.Quality{},
		Swings:     []*kinchainv1.SwingReport{{Index: 0}},
	}
	if o != nil && o.CutoffHz != nil {
		resp.SampleRateHz = o.GetCutoffHz() // echo: lets tests see the option arrived
	}
	for _, t := range c.GetTracks() {
		resp.Quality.Tracks = append(resp.Quality.Tracks, &kinchainv1.TrackQuality{Segment: t.GetSegment(), Samples: int32(len(t.GetTimeS()))})
	}
	return resp
}

// fakeSession is a test-only StreamSession: one event per batch (at the
// batch's last time), a summary with the sample count on Close. A batch
// whose track has a NaN time is rejected with a *validate.Error.
type fakeSession struct {
	samples int64
	last    float64
	batches int
}

func fakeStreams(h *kinchainv1.StreamHeader) (server.StreamSession, error) {
	if !(h.GetRateHz() > 0) {
		return nil, &validate.Error{Field: "rate_hz", Sample: -1, Reason: validate.ReasonMissingField, Detail: "required, Hz"}
	}
	return &fakeSession{}, nil
}

func (s *fakeSession) Push(b *kinchainv1.SampleBatch) ([]*kinchainv1.StreamCaptureResponse, error) {
	for i, t := range b.GetTracks() {
		for k, v := range t.GetTimeS() {
			if math.IsNaN(v) {
				return nil, &validate.Error{Field: fmt.Sprintf("tracks[%d].time_s", i), Sample: k, Reason: validate.ReasonNonFinite, Detail: "not finite"}
			}
			s.last = v
		}
		s.samples += int64(len(t.GetTimeS()))
	}
	s.batches++
	return []*kinchainv1.StreamCaptureResponse{{Message: &kinchainv1.StreamCaptureResponse_Event{Event: &kinchainv1.StreamEvent{
		SwingIndex: 0, Event: &kinchainv1.Event{Kind: kinchainv1.EventKind_EVENT_KIND_ADDRESS, TimeS: s.last}, DetectedAtS: s.last,
	}}}}, nil
}

func (s *fakeSession) Close() []*kinchainv1.StreamCaptureResponse {
	return []*kinchainv1.StreamCaptureResponse{
		{Message: &kinchainv1.StreamCaptureResponse_Swing{Swing: &kinchainv1.SwingReport{Index: 0}}},
		{Message: &kinchainv1.StreamCaptureResponse_Summary{Summary: &kinchainv1.StreamSummary{Samples: s.samples, Swings: 1, DurationS: s.last}}},
	}
}

// syncBuffer is a goroutine-safe log sink.
type syncBuffer struct {
	mu sync.Mutex
	b  bytes.Buffer
}

func (b *syncBuffer) Write(p []byte) (int, error) {
	b.mu.Lock()
	defer b.mu.Unlock()
	return b.b.Write(p)
}

func (b *syncBuffer) String() string {
	b.mu.Lock()
	defer b.mu.Unlock()
	return b.b.String()
}

func newJSONLogger(w io.Writer) *slog.Logger {
	return slog.New(slog.NewJSONHandler(w, &slog.HandlerOptions{Level: slog.LevelDebug}))
}

// testServer is a running Server.
type testServer struct {
	t      *testing.T
	srv    *server.Server
	reg    *prometheus.Registry
	logs   *syncBuffer
	cancel context.CancelFunc
	done   chan error
	bufLis *bufconn.Listener
	once   sync.Once
	err    error
}

// testConfig is the default config on loopback ports chosen by the OS.
func testConfig() server.Config {
	cfg := server.DefaultConfig()
	cfg.GRPCAddr, cfg.HTTPAddr, cfg.MetricsAddr = "127.0.0.1:0", "127.0.0.1:0", "127.0.0.1:0"
	cfg.ShutdownGrace = 5 * time.Second
	return cfg
}

// startServer runs a server until the test ends. With bufconn the gRPC
// side listens in memory.
func startServer(t *testing.T, cfg server.Config, a server.Analyzer, sf server.StreamFactory, useBufconn bool) *testServer {
	t.Helper()
	ts := &testServer{t: t, reg: prometheus.NewRegistry(), logs: &syncBuffer{}, done: make(chan error, 1)}
	if useBufconn {
		ts.bufLis = bufconn.Listen(1 << 20)
		cfg.GRPCListener = ts.bufLis
	}
	log := slog.New(slog.NewJSONHandler(ts.logs, &slog.HandlerOptions{Level: slog.LevelDebug}))
	srv, err := server.New(cfg, a, sf, ts.reg, log)
	if err != nil {
		t.Fatalf("New: %v", err)
	}
	ts.srv = srv
	ctx, cancel := context.WithCancel(context.Background())
	ts.cancel = cancel
	go func() { ts.done <- srv.Serve(ctx) }()
	t.Cleanup(func() {
		if err := ts.stop(); err != nil {
			t.Errorf("Serve: %v", err)
		}
		if t.Failed() {
			t.Logf("server log:\n%s", ts.logs.String())
		}
	})
	return ts
}

// stop cancels Serve and waits for it.
func (ts *testServer) stop() error {
	ts.once.Do(func() {
		ts.cancel()
		select {
		case ts.err = <-ts.done:
		case <-time.After(30 * time.Second):
			ts.err = fmt.Errorf("Serve did not return within 30 s of cancel")
		}
	})
	return ts.err
}

// conn dials the server's gRPC side (bufconn or loopback).
func (ts *testServer) conn() *grpc.ClientConn {
	ts.t.Helper()
	opts := []grpc.DialOption{grpc.WithTransportCredentials(insecure.NewCredentials())}
	target := "passthrough:///" + ts.srv.Addrs().GRPC
	if ts.bufLis != nil {
		opts = append(opts, grpc.WithContextDialer(func(ctx context.Context, _ string) (net.Conn, error) {
			return ts.bufLis.DialContext(ctx)
		}))
		target = "passthrough:///bufnet"
	}
	cc, err := grpc.NewClient(target, opts...)
	if err != nil {
		ts.t.Fatal(err)
	}
	ts.t.Cleanup(func() { cc.Close() })
	return cc
}

func (ts *testServer) client() kinchainv1.KinematicsServiceClient {
	return kinchainv1.NewKinematicsServiceClient(ts.conn())
}

func (ts *testServer) httpURL(path string) string { return "http://" + ts.srv.Addrs().HTTP + path }

// goodCapture is a small valid capture: two tracks of n samples at 100 Hz,
// identity orientation.
func goodCapture(id string, n int) *kinchainv1.Capture {
	c := &kinchainv1.Capture{CaptureId: id}
	for _, seg := range []kinchainv1.Segment{kinchainv1.Segment_SEGMENT_PELVIS, kinchainv1.Segment_SEGMENT_THORAX} {
		t := &kinchainv1.Track{Segment: seg}
		for i := 0; i < n; i++ {
			t.TimeS = append(t.TimeS, float64(i)/100)
			t.Qw = append(t.Qw, 1)
			t.Qx = append(t.Qx, 0)
			t.Qy = append(t.Qy, 0)
			t.Qz = append(t.Qz, 0)
		}
		c.Tracks = append(c.Tracks, t)
	}
	return c
}

// goodCSV is goodCapture in the CSV capture format.
func goodCSV(id string, n int) string {
	var b strings.Builder
	fmt.Fprintf(&b, "# capture_id: %s\ntime_s,segment,qw,qx,qy,qz\n", id)
	for i := 0; i < n; i++ {
		for _, seg := range []string{"pelvis", "thorax"} {
			fmt.Fprintf(&b, "%g,%s,1,0,0,0\n", float64(i)/100, seg)
		}
	}
	return b.String()
}
