package server_test

import (
	"context"
	"net/http"
	"strings"
	"testing"
	"time"

	"go.uber.org/goleak"
	healthpb "google.golang.org/grpc/health/grpc_health_v1"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/server"
)

// TestGracefulDrain: after Serve's context is cancelled, in-flight gRPC and
// HTTP requests run to completion while readiness and health say not
// serving; then Serve returns nil.
func TestGracefulDrain(t *testing.T) {
	opt := goleak.IgnoreCurrent()
	fa := &fakeAnalyzer{gate: make(chan struct{}), started: make(chan struct{}, 4)}
	cfg := testConfig()
	cfg.ShutdownDelay = 300 * time.Millisecond // long enough to probe health during the drain
	ts := startServer(t, cfg, fa, nil, false)
	conn := ts.conn()
	c := kinchainv1.NewKinematicsServiceClient(conn)
	hc := healthpb.NewHealthClient(conn)

	grpcDone := make(chan error, 1)
	go func() {
		_, err := c.AnalyzeCapture(context.Background(), &kinchainv1.AnalyzeCaptureRequest{Capture: goodCapture("inflight", 20)})
		grpcDone <- err
	}()
	httpDone := make(chan int, 1)
	go func() {
		code, _, _ := httpDo(t, "POST", ts.httpURL("/v1/captures:analyze"), "text/csv", strings.NewReader(goodCSV("inflight", 20)))
		httpDone <- code
	}()
	<-fa.started
	<-fa.started

	stopped := make(chan error, 1)
	go func() { stopped <- ts.stop() }()

	// During the shutdown delay the listeners still answer, saying not ready.
	deadline := time.Now().Add(5 * time.Second)
	var ready int
	var hs healthpb.HealthCheckResponse_ServingStatus
	for time.Now().Before(deadline) {
		if resp, err := http.Get(ts.httpURL("/readyz")); err == nil {
			ready = resp.StatusCode
			resp.Body.Close()
		}
		if r, err := hc.Check(context.Background(), &healthpb.HealthCheckRequest{}); err == nil {
			hs = r.GetStatus()
		}
		if ready == http.StatusServiceUnavailable && hs == healthpb.HealthCheckResponse_NOT_SERVING {
			break
		}
		time.Sleep(10 * time.Millisecond)
	}
	if ready != http.StatusServiceUnavailable || hs != healthpb.HealthCheckResponse_NOT_SERVING {
		t.Errorf("while draining: /readyz %d, health %v; want 503 and NOT_SERVING", ready, hs)
	}
	select {
	case err := <-stopped:
		t.Fatalf("Serve returned (%v) with requests in flight", err)
	default:
	}

	close(fa.gate) // let the in-flight requests finish
	if err := <-grpcDone; err != nil {
		t.Errorf("in-flight gRPC call: %v, want it to complete", err)
	}
	if code := <-httpDone; code != http.StatusOK {
		t.Errorf("in-flight HTTP request: %d, want 200", code)
	}
	if err := <-stopped; err != nil {
		t.Errorf("Serve: %v", err)
	}
	conn.Close()
	http.DefaultClient.CloseIdleConnections()
	goleak.VerifyNone(t, opt)
}

// TestHardStopAfterGrace: a request that outlives the grace period does not
// hold Serve.
func TestHardStopAfterGrace(t *testing.T) {
	fa := &fakeAnalyzer{gate: make(chan struct{}), started: make(chan struct{}, 1)}
	defer close(fa.gate)
	cfg := testConfig()
	cfg.ShutdownGrace = 200 * time.Millisecond
	ts := startServer(t, cfg, fa, nil, false)
	c := ts.client()
	done := make(chan error, 1)
	go func() {
		_, err := c.AnalyzeCapture(context.Background(), &kinchainv1.AnalyzeCaptureRequest{Capture: goodCapture("stuck", 20)})
		done <- err
	}()
	<-fa.started
	if err := ts.stop(); err != nil {
		t.Errorf("Serve: %v", err)
	}
	if err := <-done; err == nil {
		t.Errorf("stuck call succeeded after a hard stop")
	}
	if !strings.Contains(ts.logs.String(), `"forced":true`) {
		t.Errorf("the stop was not logged as forced:\n%s", ts.logs.String())
	}
}

func TestNewRejectsBadConfig(t *testing.T) {
	cfg := testConfig()
	cfg.MaxConcurrentRequests = 0
	cfg.TLSCertFile = "cert.pem"
	_, err := server.New(cfg, &fakeAnalyzer{}, nil, nil, nil)
	if err == nil || !strings.Contains(err.Error(), "MaxConcurrentRequests") || !strings.Contains(err.Error(), "TLSKeyFile") {
		t.Errorf("New: %v, want errors naming MaxConcurrentRequests and TLSKeyFile", err)
	}
	if _, err := server.New(testConfig(), nil, nil, nil, nil); err == nil {
		t.Errorf("New with nil Analyzer succeeded")
	}
	// A port in use fails New and releases what was bound.
	ts := startServer(t, testConfig(), &fakeAnalyzer{}, nil, false)
	cfg = testConfig()
	cfg.MetricsAddr = ts.srv.Addrs().HTTP
	if _, err := server.New(cfg, &fakeAnalyzer{}, nil, nil, nil); err == nil || !strings.Contains(err.Error(), "metrics listener") {
		t.Errorf("New on a used port: %v", err)
	}
}
