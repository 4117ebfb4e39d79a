package server_test

import (
	"bytes"
	"context"
	"net/http"
	"runtime"
	"slices"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/prometheus/client_golang/prometheus"
	dto "github.com/prometheus/client_model/go"
	"google.golang.org/genproto/googleapis/rpc/errdetails"
	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"
	"google.golang.org/protobuf/encoding/protojson"
	"google.golang.org/protobuf/proto"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/engine"
	"github.com/kinchain/kinchain/internal/server"
)

// metricValue returns the value of the series of name whose labels include
// the given pairs: a counter's or gauge's value, a histogram's count (and
// its sum as the second result); ok is false when there is no such series.
func metricValue(t *testing.T, reg *prometheus.Registry, name string, labels ...string) (v, sum float64, ok bool) {
	t.Helper()
	mfs, err := reg.Gather()
	if err != nil {
		t.Fatal(err)
	}
	for _, mf := range mfs {
		if mf.GetName() != name {
			continue
		}
	series:
		for _, m := range mf.GetMetric() {
			for i := 0; i+1 < len(labels); i += 2 {
				if !hasLabel(m, labels[i], labels[i+1]) {
					continue series
				}
			}
			switch {
			case m.Counter != nil:
				return m.GetCounter().GetValue(), 0, true
			case m.Gauge != nil:
				return m.GetGauge().GetValue(), 0, true
			case m.Histogram != nil:
				return float64(m.GetHistogram().GetSampleCount()), m.GetHistogram().GetSampleSum(), true
			}
		}
	}
	return 0, 0, false
}

func hasLabel(m *dto.Metric, k, v string) bool {
	for _, lp := range m.GetLabel() {
		if lp.GetName() == k && lp.GetValue() == v {
			return true
		}
	}
	return false
}

// quantile returns the q-quantile of ds (nearest rank).
func quantile(ds []time.Duration, q float64) time.Duration {
	if len(ds) == 0 {
		return 0
	}
	s := slices.Clone(ds)
	slices.Sort(s)
	i := int(q*float64(len(s))+0.5) - 1
	return s[max(0, min(len(s)-1, i))]
}

// TestAdmissionBeforeRead saturates the concurrency limit (two analyses
// held open) and sends a burst of ~1 MiB requests over gRPC and HTTP: every
// one is refused with RESOURCE_EXHAUSTED / 429 carrying a retry hint, and
// none of their bodies is read — the refusal comes from the headers alone
// (checked by counts: the gRPC received-size histogram holds only the two
// admitted messages, the HTTP body-size histogram only zero-byte reads).
// The latencies of the refusals are logged for DEVELOPERS.md (Performance,
// "Service"); the test asserts counts, not times.
func TestAdmissionBeforeRead(t *testing.T) {
	burst := 200
	if testing.Short() {
		burst = 50
	}
	fa := &fakeAnalyzer{gate: make(chan struct{}), started: make(chan struct{}, 4)}
	cfg := testConfig()
	cfg.MaxConcurrentRequests = 2
	cfg.MaxRecvMsgBytes = 4 << 20
	ts := startServer(t, cfg, fa, nil, false)
	c := ts.client()
	big := &kinchainv1.AnalyzeCaptureRequest{Capture: goodCapture("big", 13000)} // ~1 MiB
	if n := proto.Size(big); n < 1<<20-50000 {
		t.Fatalf("request of %d bytes, want ~1 MiB", n)
	}
	held := make(chan error, 2)
	for i := 0; i < 2; i++ {
		go func() {
			_, err := c.AnalyzeCapture(context.Background(), big)
			held <- err
		}()
	}
	<-fa.started
	<-fa.started

	var mu sync.Mutex
	var lat []time.Duration
	codesSeen := map[codes.Code]int{}
	var wg sync.WaitGroup
	for i := 0; i < burst; i++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			start := time.Now()
			_, err := c.AnalyzeCapture(context.Background(), big)
			d := time.Since(start)
			retry := false
			for _, det := range status.Convert(err).Details() {
				_, retry = det.(*errdetails.RetryInfo)
			}
			mu.Lock()
			defer mu.Unlock()
			codesSeen[status.Code(err)]++
			if retry {
				lat = append(lat, d)
			}
		}()
	}
	wg.Wait()
	if codesSeen[codes.ResourceExhausted] != burst || len(lat) != burst {
		t.Errorf("burst of %d: codes %v, %d with RetryInfo; want all RESOURCE_EXHAUSTED with RetryInfo", burst, codesSeen, len(lat))
	}
	if n, _, _ := metricValue(t, ts.reg, "kinchain_grpc_received_message_size_bytes", "method", kinchainv1.KinematicsService_AnalyzeCapture_FullMethodName); n != 2 {
		t.Errorf("%v request messages read, want only the 2 admitted ones", n)
	}
	if n, _, _ := metricValue(t, ts.reg, "kinchain_requests_rejected_total", "limit", "requests"); n != float64(burst) {
		t.Errorf("rejected_total{limit=requests} = %v, want %d", n, burst)
	}
	t.Logf("gRPC refusals of %d ~1 MiB calls while saturated: p50 %v, p99 %v, max %v", burst, quantile(lat, 0.5), quantile(lat, 0.99), quantile(lat, 1))

	// HTTP: the same with CSV bodies of ~1 MiB.
	body := goodCSV("big", 28000)
	hc := &http.Client{}
	defer hc.CloseIdleConnections()
	lat = lat[:0]
	n429 := 0
	for i := 0; i < burst/2; i++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			start := time.Now()
			resp, err := hc.Post(ts.httpURL("/v1/captures:analyze"), "text/csv", strings.NewReader(body))
			d := time.Since(start)
			if err != nil {
				t.Errorf("POST: %v", err)
				return
			}
			resp.Body.Close()
			mu.Lock()
			defer mu.Unlock()
			if resp.StatusCode == http.StatusTooManyRequests && resp.Header.Get("Retry-After") == "1" {
				n429++
				lat = append(lat, d)
			}
		}()
	}
	wg.Wait()
	if n429 != burst/2 {
		t.Errorf("HTTP burst of %d: %d answered 429 with Retry-After", burst/2, n429)
	}
	if n, sum, _ := metricValue(t, ts.reg, "kinchain_http_request_size_bytes", "route", "/v1/captures:analyze"); n != float64(burst/2) || sum != 0 {
		t.Errorf("HTTP body bytes read: %v requests, %v bytes; want %d requests and 0 bytes", n, sum, burst/2)
	}
	t.Logf("HTTP refusals of %d ~1 MiB bodies while saturated: p50 %v, p99 %v, max %v", burst/2, quantile(lat, 0.5), quantile(lat, 0.99), quantile(lat, 1))

	close(fa.gate)
	for i := 0; i < 2; i++ {
		if err := <-held; err != nil {
			t.Errorf("held call: %v", err)
		}
	}
	// The slots are free again.
	if _, err := c.AnalyzeCapture(context.Background(), &kinchainv1.AnalyzeCaptureRequest{Capture: goodCapture("after", 20)}); err != nil {
		t.Errorf("after the burst: %v", err)
	}
}

// heapSampler records the largest live heap (HeapAlloc right after a
// forced collection) seen while it runs.
type heapSampler struct {
	stop chan struct{}
	done chan uint64
}

func sampleHeap(every time.Duration) *heapSampler {
	h := &heapSampler{stop: make(chan struct{}), done: make(chan uint64, 1)}
	go func() {
		var peak uint64
		var ms runtime.MemStats
		tk := time.NewTicker(every)
		defer tk.Stop()
		for {
			runtime.GC()
			runtime.ReadMemStats(&ms)
			peak = max(peak, ms.HeapAlloc)
			select {
			case <-h.stop:
				h.done <- peak
				return
			case <-tk.C:
			}
		}
	}()
	return h
}

func (h *heapSampler) peak() uint64 { close(h.stop); return <-h.done }

func liveHeap() uint64 {
	var ms runtime.MemStats
	runtime.GC()
	runtime.GC()
	runtime.ReadMemStats(&ms)
	return ms.HeapAlloc
}

// Terms of the memory bound (DEVELOPERS.md, Service, "Memory bound of the
// service"): per admitted request of M wire bytes the server holds at most
//
//	E × M = (wireCopies + server's maxExpansion + A_engine + responseCopies) × M
//
// bytes: gRPC's pooled receive buffer and the raw copy the server decodes
// from (wireCopies = 2); the decoded request, at most maxExpansion (4) × M
// by the server's expansion check; the engine's allocations while
// analysing, A_engine × M (measured below: total bytes allocated by one
// analysis ÷ M, an upper bound of what it holds at once); the response and
// its encoding (responseCopies = 2, for a response no larger than the
// request). With C admitted at once the server holds at most C × E × M
// beyond its idle heap, plus fixed per-connection costs (flow-control
// windows, socket buffers, goroutines, and here also the 16 flooding
// clients living in the same process), fixedSlack: 24 MiB, measured at
// 14–17 MiB on a quiet machine and up to 17 MiB under CI load. Without
// admission control the flood (16 clients × 12 requests × E × M) would
// need more than 100 MiB. Refused requests cost nothing: their messages
// are never read (TestAdmissionBeforeRead).
const (
	wireCopies     = 2
	maxExpansion   = 4 // server's maxExpansion in wire.go
	responseCopies = 2
	fixedSlack     = 24 << 20
)

// TestMemoryBoundUnderFlood floods a server with the real engine (limits
// lowered: 2 analyses at once, messages of at most one ~720 KB capture)
// with maximum-size requests from 16 clients, over gRPC and then HTTP
// (JSON), and checks that the live heap (sampled after forced collections
// while the flood runs) stays within the computed bound above its idle
// level. The HTTP bound replaces the wire terms with JSON's: io.ReadAll
// may hold up to 2 × M, a JSON number is at least 2 bytes for the 8 of a
// float64 (decoded ≤ 4 × M, ≤ 8 × M with slice growth), and the engine
// allocates A_engine per decoded protobuf byte.
func TestMemoryBoundUnderFlood(t *testing.T) {
	clients, perClient := 16, 12
	if testing.Short() {
		clients, perClient = 8, 4
	}
	capture := benchCapture(t)
	req := &kinchainv1.AnalyzeCaptureRequest{Capture: capture}
	wire, err := proto.Marshal(req)
	if err != nil {
		t.Fatal(err)
	}
	jsonBody, err := protojson.Marshal(req)
	if err != nil {
		t.Fatal(err)
	}
	eng := engine.New(engine.Config{})

	// A_engine: bytes the engine allocates per wire byte for this capture.
	var a, b runtime.MemStats
	runtime.GC()
	runtime.ReadMemStats(&a)
	if _, err := eng.Analyze(context.Background(), req); err != nil {
		t.Fatal(err)
	}
	runtime.ReadMemStats(&b)
	aEngine := float64(b.TotalAlloc-a.TotalAlloc) / float64(len(wire))

	const conc = 2
	cfg := testConfig()
	cfg.MaxConcurrentRequests = conc
	cfg.MaxRecvMsgBytes = len(jsonBody) // the largest JSON body; gRPC messages are smaller
	ts := startServer(t, cfg, eng, nil, false)
	// Two connections; the clients send the one encoded request (raw
	// codec), so that the flood adds no client-side copies to the heap.
	conns := []*grpc.ClientConn{ts.conn(), ts.conn()}

	flood := func(name string, call func() (int, error)) (ok, busy int) {
		var mu sync.Mutex
		var wg sync.WaitGroup
		for i := 0; i < clients; i++ {
			wg.Add(1)
			go func() {
				defer wg.Done()
				for k := 0; k < perClient; k++ {
					code, err := call()
					mu.Lock()
					switch {
					case err == nil && code == 0:
						ok++
					case code == int(codes.ResourceExhausted):
						busy++
					default:
						t.Errorf("%s: code %d, %v", name, code, err)
					}
					mu.Unlock()
				}
			}()
		}
		wg.Wait()
		return ok, busy
	}

	// gRPC: the bound per admitted request of M = len(wire).
	base := liveHeap()
	hs := sampleHeap(20 * time.Millisecond)
	i := 0
	var imu sync.Mutex
	ok, busy := flood("gRPC", func() (int, error) {
		imu.Lock()
		cc := conns[i%len(conns)]
		i++
		imu.Unlock()
		err := cc.Invoke(context.Background(), kinchainv1.KinematicsService_AnalyzeCapture_FullMethodName, &wire, &kinchainv1.AnalyzeCaptureResponse{}, rawCallOption())
		if err != nil {
			return int(status.Code(err)), err
		}
		return 0, nil
	})
	peak := hs.peak()
	e := wireCopies + maxExpansion + aEngine + responseCopies
	bound := uint64(conc*e*float64(len(wire))) + fixedSlack
	grow := int64(peak) - int64(base)
	t.Logf("gRPC flood: %d ok, %d refused; live heap %d → peak %d (+%.1f MiB); bound C × E × M + slack = %d × %.1f × %d + %d = %.1f MiB (A_engine %.2f)",
		ok, busy, base, peak, float64(grow)/(1<<20), conc, e, len(wire), fixedSlack, float64(bound)/(1<<20), aEngine)
	if ok == 0 || busy == 0 {
		t.Errorf("gRPC flood: %d ok, %d refused; want both (the flood must saturate the limit)", ok, busy)
	}
	if grow > int64(bound) {
		t.Errorf("gRPC flood: live heap grew %d bytes, more than the bound %d", grow, bound)
	}

	// HTTP with JSON bodies of M = len(jsonBody).
	hc := &http.Client{}
	defer hc.CloseIdleConnections()
	base = liveHeap()
	hs = sampleHeap(20 * time.Millisecond)
	ok, busy = flood("HTTP", func() (int, error) {
		resp, err := hc.Post(ts.httpURL("/v1/captures:analyze"), "application/json", bytes.NewReader(jsonBody))
		if err != nil {
			return -1, err
		}
		defer resp.Body.Close()
		var out bytes.Buffer
		_, _ = out.ReadFrom(resp.Body)
		switch resp.StatusCode {
		case http.StatusOK:
			return 0, nil
		case http.StatusTooManyRequests:
			return int(codes.ResourceExhausted), nil
		}
		return resp.StatusCode, nil
	})
	peak = hs.peak()
	eHTTP := 2 + 8 + 4*aEngine + responseCopies
	bound = uint64(conc*eHTTP*float64(len(jsonBody))) + fixedSlack
	grow = int64(peak) - int64(base)
	t.Logf("HTTP flood: %d ok, %d refused; live heap %d → peak %d (+%.1f MiB); bound %d × %.1f × %d + %d = %.1f MiB",
		ok, busy, base, peak, float64(grow)/(1<<20), conc, eHTTP, len(jsonBody), fixedSlack, float64(bound)/(1<<20))
	if ok == 0 || busy == 0 {
		t.Errorf("HTTP flood: %d ok, %d refused; want both", ok, busy)
	}
	if grow > int64(bound) {
		t.Errorf("HTTP flood: live heap grew %d bytes, more than the bound %d", grow, bound)
	}
	_ = server.DefaultConfig
}
