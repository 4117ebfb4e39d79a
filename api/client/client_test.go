package client_test

import (
	"context"
	"io"
	"log/slog"
	"sync/atomic"
	"testing"
	"time"

	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/metadata"
	"google.golang.org/grpc/resolver"
	"google.golang.org/grpc/resolver/manual"
	"google.golang.org/grpc/status"

	"github.com/kinchain/kinchain/api/client"
	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/server"
)

// countingAnalyzer is a test-only Analyzer: it counts calls, fails the
// first failFirst of them with UNAVAILABLE, optionally waits for its
// context to end, and echoes the capture id.
type countingAnalyzer struct {
	calls     atomic.Int64
	failFirst int64
	block     bool
	deadline  atomic.Bool // a call arrived with a deadline
}

func (a *countingAnalyzer) Analyze(ctx context.Context, req *kinchainv1.AnalyzeCaptureRequest) (*kinchainv1.AnalyzeCaptureResponse, error) {
	n := a.calls.Add(1)
	if _, ok := ctx.Deadline(); ok {
		a.deadline.Store(true)
	}
	if n <= a.failFirst {
		return nil, status.Error(codes.Unavailable, "replica going away")
	}
	if a.block {
		<-ctx.Done()
		return nil, ctx.Err()
	}
	return &kinchainv1.AnalyzeCaptureResponse{CaptureId: req.GetCapture().GetCaptureId()}, nil
}

func (a *countingAnalyzer) AnalyzeCSV(context.Context, io.Reader, *kinchainv1.AnalysisOptions) (*kinchainv1.AnalyzeCaptureResponse, error) {
	return nil, status.Error(codes.Unimplemented, "not in this test")
}

// serve runs a gRPC-only server on a loopback port until the test ends.
func serve(t *testing.T, a server.Analyzer) string {
	t.Helper()
	cfg := server.DefaultConfig()
	cfg.GRPCAddr, cfg.HTTPAddr, cfg.MetricsAddr = "127.0.0.1:0", "", ""
	cfg.RequestTimeout = time.Hour // so the client's deadline is the one seen
	srv, err := server.New(cfg, a, nil, nil, slog.New(slog.NewTextHandler(io.Discard, nil)))
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithCancel(context.Background())
	done := make(chan error, 1)
	go func() { done <- srv.Serve(ctx) }()
	t.Cleanup(func() {
		cancel()
		if err := <-done; err != nil {
			t.Error(err)
		}
	})
	return srv.Addrs().GRPC
}

func TestAnalyze(t *testing.T) {
	a := &countingAnalyzer{}
	c, err := client.New(serve(t, a), client.Options{})
	if err != nil {
		t.Fatal(err)
	}
	defer c.Close()
	var hdr metadata.MD
	resp, err := c.Analyze(client.WithRequestID(context.Background(), "job-7"), &kinchainv1.Capture{CaptureId: "cap"}, nil, grpc.Header(&hdr))
	if err != nil {
		t.Fatal(err)
	}
	if resp.GetCaptureId() != "cap" {
		t.Errorf("capture id %q", resp.GetCaptureId())
	}
	if got := hdr.Get("x-request-id"); len(got) != 1 || got[0] != "job-7" {
		t.Errorf("x-request-id = %v", got)
	}
	if !a.deadline.Load() {
		t.Errorf("the call arrived without the client's default deadline")
	}
}

func TestDefaultDeadline(t *testing.T) {
	c, err := client.New(serve(t, &countingAnalyzer{block: true}), client.Options{Timeout: 100 * time.Millisecond})
	if err != nil {
		t.Fatal(err)
	}
	defer c.Close()
	_, err = c.Analyze(context.Background(), &kinchainv1.Capture{}, nil)
	if status.Code(err) != codes.DeadlineExceeded {
		t.Errorf("%v, want DeadlineExceeded from the default deadline", err)
	}
}

func TestRetryOnUnavailable(t *testing.T) {
	a := &countingAnalyzer{failFirst: 1}
	c, err := client.New(serve(t, a), client.Options{})
	if err != nil {
		t.Fatal(err)
	}
	defer c.Close()
	if _, err := c.Analyze(context.Background(), &kinchainv1.Capture{CaptureId: "r"}, nil); err != nil {
		t.Fatalf("%v, want success after a retry", err)
	}
	if n := a.calls.Load(); n != 2 {
		t.Errorf("%d attempts, want 2", n)
	}
}

// TestRoundRobin: with two backends behind one name (as DNS returns for a
// headless Service) calls go to both.
func TestRoundRobin(t *testing.T) {
	a1, a2 := &countingAnalyzer{}, &countingAnalyzer{}
	r := manual.NewBuilderWithScheme("kctest")
	r.InitialState(resolver.State{Addresses: []resolver.Address{{Addr: serve(t, a1)}, {Addr: serve(t, a2)}}})
	c, err := client.New(r.Scheme()+":///kinchain", client.Options{DialOptions: []grpc.DialOption{grpc.WithResolvers(r)}})
	if err != nil {
		t.Fatal(err)
	}
	defer c.Close()
	// round_robin picks among the backends that are ready; the second may
	// still be connecting during the first calls, so call until both have
	// answered (at most 500 calls).
	for i := 0; i < 500 && (a1.calls.Load() == 0 || a2.calls.Load() == 0); i++ {
		if _, err := c.Analyze(context.Background(), &kinchainv1.Capture{}, nil); err != nil {
			t.Fatal(err)
		}
		if i >= 20 {
			time.Sleep(time.Millisecond)
		}
	}
	if a1.calls.Load() == 0 || a2.calls.Load() == 0 {
		t.Errorf("calls per backend %d, %d: want both used (round_robin)", a1.calls.Load(), a2.calls.Load())
	}
}

func TestNewRejectsEmptyTarget(t *testing.T) {
	if _, err := client.New("", client.Options{}); err == nil {
		t.Error("empty target accepted")
	}
}
