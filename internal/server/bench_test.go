package server_test

import (
	"bytes"
	"context"
	"fmt"
	"io"
	"log/slog"
	"net"
	"net/http"
	"sync"
	"sync/atomic"
	"testing"
	"time"

	"github.com/grpc-ecosystem/grpc-gateway/v2/runtime"
	"github.com/prometheus/client_golang/prometheus"
	"google.golang.org/grpc"
	"google.golang.org/protobuf/encoding/protojson"

	kclient "github.com/kinchain/kinchain/api/client"
	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/engine"
	"github.com/kinchain/kinchain/internal/procstat"
	"github.com/kinchain/kinchain/internal/server"
	"github.com/kinchain/kinchain/internal/synth"
)

// benchSegments are the six segments of the benchmark capture: the
// kinematic chain pelvis → thorax → lead arm → club.
var benchSegments = []kinchainv1.Segment{
	kinchainv1.Segment_SEGMENT_PELVIS, kinchainv1.Segment_SEGMENT_THORAX,
	kinchainv1.Segment_SEGMENT_LEAD_UPPER_ARM, kinchainv1.Segment_SEGMENT_LEAD_FOREARM,
	kinchainv1.Segment_SEGMENT_LEAD_HAND, kinchainv1.Segment_SEGMENT_CLUB,
}

// benchCapture is the benchmark input: 3 s of the synthetic model golfer,
// six segments at 1000 Hz (18,000 samples).
func benchCapture(tb testing.TB) *kinchainv1.Capture {
	tb.Helper()
	c, _, err := synth.Generate(synth.Config{Rate: 1000, Duration: 3, LeadIn: 0.5, Tail: 0.3, Segments: benchSegments})
	if err != nil {
		tb.Fatal(err)
	}
	return c
}

// runConcurrent calls f b.N times from c goroutines and reports the
// throughput as analyses/s, and the process CPU time (client and server
// together) per analysis as cpu-ms/op. On a shared machine the CPU time is
// the steadier figure: wall-clock throughput also measures the neighbours.
func runConcurrent(b *testing.B, c int, f func() error) {
	var next atomic.Int64
	var wg sync.WaitGroup
	var failed atomic.Bool
	b.ResetTimer()
	cpu0 := procstat.Self()
	for i := 0; i < c; i++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for next.Add(1) <= int64(b.N) && !failed.Load() {
				if err := f(); err != nil {
					failed.Store(true)
					b.Error(err)
					return
				}
			}
		}()
	}
	wg.Wait()
	b.StopTimer()
	b.ReportMetric(float64(b.N)/b.Elapsed().Seconds(), "analyses/s")
	b.ReportMetric(float64(procstat.Self()-cpu0)/float64(time.Millisecond)/float64(b.N), "cpu-ms/op")
}

func postJSON(hc *http.Client, url string, body []byte) error {
	resp, err := hc.Post(url, "application/json", bytes.NewReader(body))
	if err != nil {
		return err
	}
	defer resp.Body.Close()
	if _, err := io.Copy(io.Discard, resp.Body); err != nil {
		return err
	}
	if resp.StatusCode != http.StatusOK {
		return fmt.Errorf("HTTP %d", resp.StatusCode)
	}
	return nil
}

// BenchmarkThroughput measures, side by side in one run, analyses per
// second of the benchmark capture with the real engine:
//
//	inprocess        engine.Analyze called directly
//	grpc             unary AnalyzeCapture over loopback TCP (full interceptor chain)
//	gateway          POST /v1/captures:analyze, protojson, gateway registered in-process (the server's choice)
//	gateway-loopback the same JSON through a grpc-gateway that dials the gRPC port (the alternative)
//
// each at concurrency 1, 2, 4 and 8. Client and server share the machine.
// Run: go test ./internal/server -run '^$' -bench Throughput -benchtime 3s
func BenchmarkThroughput(b *testing.B) {
	eng := engine.New(engine.Config{})
	req := &kinchainv1.AnalyzeCaptureRequest{Capture: benchCapture(b)}
	if _, err := eng.Analyze(context.Background(), req); err != nil {
		b.Fatalf("the benchmark capture does not analyse: %v", err)
	}
	body, err := protojson.Marshal(req)
	if err != nil {
		b.Fatal(err)
	}

	cfg := server.DefaultConfig()
	cfg.GRPCAddr, cfg.HTTPAddr, cfg.MetricsAddr = "127.0.0.1:0", "127.0.0.1:0", ""
	cfg.MaxConcurrentRequests = 64
	log := slog.New(slog.NewJSONHandler(io.Discard, nil)) // formatting cost included
	srv, err := server.New(cfg, eng, nil, prometheus.NewRegistry(), log)
	if err != nil {
		b.Fatal(err)
	}
	ctx, cancel := context.WithCancel(context.Background())
	served := make(chan error, 1)
	go func() { served <- srv.Serve(ctx) }()
	defer func() {
		cancel()
		if err := <-served; err != nil {
			b.Error(err)
		}
	}()

	dial := kclient.DialOptions(kclient.Options{}) // the client package's defaults
	cc, err := grpc.NewClient(srv.Addrs().GRPC, dial...)
	if err != nil {
		b.Fatal(err)
	}
	defer cc.Close()
	client := kinchainv1.NewKinematicsServiceClient(cc)

	// The loopback alternative: a gateway that forwards over a gRPC client
	// connection, with the same marshaler (and JSON fast path) as the
	// server's in-process gateway.
	lgw := runtime.NewServeMux(runtime.WithMarshalerOption(runtime.MIMEWildcard, server.GatewayMarshaler))
	if err := kinchainv1.RegisterKinematicsServiceHandlerFromEndpoint(ctx, lgw, srv.Addrs().GRPC, dial); err != nil {
		b.Fatal(err)
	}
	lis, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		b.Fatal(err)
	}
	lsrv := &http.Server{Handler: lgw, ReadHeaderTimeout: 10 * time.Second}
	go func() { _ = lsrv.Serve(lis) }()
	defer lsrv.Close()

	hc := &http.Client{Transport: &http.Transport{MaxIdleConnsPerHost: 16}}
	defer hc.CloseIdleConnections()
	gwURL := "http://" + srv.Addrs().HTTP + "/v1/captures:analyze"
	lgwURL := "http://" + lis.Addr().String() + "/v1/captures:analyze"

	bctx := context.Background()
	for _, c := range []int{1, 2, 4, 8} {
		b.Run(fmt.Sprintf("inprocess/c=%d", c), func(b *testing.B) {
			runConcurrent(b, c, func() error { _, err := eng.Analyze(bctx, req); return err })
		})
		b.Run(fmt.Sprintf("grpc/c=%d", c), func(b *testing.B) {
			runConcurrent(b, c, func() error { _, err := client.AnalyzeCapture(bctx, req); return err })
		})
		b.Run(fmt.Sprintf("gateway/c=%d", c), func(b *testing.B) {
			runConcurrent(b, c, func() error { return postJSON(hc, gwURL, body) })
		})
		b.Run(fmt.Sprintf("gateway-loopback/c=%d", c), func(b *testing.B) {
			runConcurrent(b, c, func() error { return postJSON(hc, lgwURL, body) })
		})
	}
}
