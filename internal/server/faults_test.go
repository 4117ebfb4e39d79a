package server_test

import (
	"bufio"
	"context"
	"errors"
	"fmt"
	"io"
	"net"
	"net/http"
	"strings"
	"sync"
	"sync/atomic"
	"testing"
	"time"

	"go.uber.org/goleak"
	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/credentials/insecure"
	"google.golang.org/grpc/status"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/engine"
	"github.com/kinchain/kinchain/internal/server"
	"github.com/kinchain/kinchain/internal/stream"
	"github.com/kinchain/kinchain/internal/synth"
)

// Fault tests: clients that vanish, stall, give up or are cut off by a
// shutdown. Each checks that the server loses no response it owes, leaks
// no goroutine (goleak) and keeps serving.

func realStreams(h *kinchainv1.StreamHeader) (server.StreamSession, error) {
	s, err := stream.NewSession(h, stream.Limits{})
	if err != nil {
		return nil, err
	}
	return s, nil
}

// swingMessages is a stream of the synthetic model golfer's one swing
// (six segments, 200 Hz) as a header and 0.1 s batches.
func swingMessages(t *testing.T) []*kinchainv1.StreamCaptureRequest {
	t.Helper()
	c, _, err := synth.Generate(synth.Config{Rate: 200, Segments: benchSegments})
	if err != nil {
		t.Fatal(err)
	}
	h, err := stream.HeaderFor(c, nil)
	if err != nil {
		t.Fatal(err)
	}
	msgs := []*kinchainv1.StreamCaptureRequest{{Message: &kinchainv1.StreamCaptureRequest_Header{Header: h}}}
	err = stream.Split(c, 0.1, func(b *kinchainv1.SampleBatch, _ float64) error {
		msgs = append(msgs, &kinchainv1.StreamCaptureRequest{Message: &kinchainv1.StreamCaptureRequest_Batch{Batch: b}})
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	return msgs
}

// waitMetric polls a metric until it has the wanted value (bounded).
func waitMetric(t *testing.T, ts *testServer, want float64, name string, labels ...string) {
	t.Helper()
	var v float64
	for i := 0; i < 500; i++ {
		v, _, _ = metricValue(t, ts.reg, name, labels...)
		if v == want {
			return
		}
		time.Sleep(10 * time.Millisecond)
	}
	t.Errorf("%s%v = %v, want %v", name, labels, v, want)
}

// TestDroppedStreams: 1000 clients (100 with -short) open a stream over
// four connections, send the header and the first 60 % of a swing, and
// drop the call (cancel) mid-swing. Every stream must end as canceled,
// the stream slots must all come back, a full stream afterwards must
// succeed, and no goroutine may be left behind.
func TestDroppedStreams(t *testing.T) {
	opt := goleak.IgnoreCurrent()
	n := 1000
	if testing.Short() {
		n = 100
	}
	msgs := swingMessages(t)
	cut := 1 + (len(msgs)-1)*6/10
	cfg := testConfig()
	cfg.MaxConcurrentStreams = 64
	ts := startServer(t, cfg, engine.New(engine.Config{}), realStreams, false)
	var clients []kinchainv1.KinematicsServiceClient
	var conns []*grpc.ClientConn
	for i := 0; i < 4; i++ {
		cc, err := grpc.NewClient(ts.srv.Addrs().GRPC, grpc.WithTransportCredentials(insecure.NewCredentials()))
		if err != nil {
			t.Fatal(err)
		}
		conns = append(conns, cc)
		clients = append(clients, kinchainv1.NewKinematicsServiceClient(cc))
	}
	sem := make(chan struct{}, 8) // well under the 64-stream limit: slots come back a moment after a drop
	var wg sync.WaitGroup
	var failed atomic.Int64
	for i := 0; i < n; i++ {
		wg.Add(1)
		sem <- struct{}{}
		go func() {
			defer wg.Done()
			defer func() { <-sem }()
			ctx, cancel := context.WithCancel(context.Background())
			defer cancel()
			st, err := clients[i%len(clients)].StreamCapture(ctx)
			if err != nil {
				failed.Add(1)
				return
			}
			for _, m := range msgs[:cut] {
				if err := st.Send(m); err != nil {
					// The server ended the call: refused for want of a
					// slot while earlier drops were still being cleaned up.
					if _, err := st.Recv(); status.Code(err) != codes.ResourceExhausted {
						failed.Add(1)
					}
					return
				}
			}
			cancel() // the client vanishes mid-swing
			_, _ = st.Recv()
		}()
	}
	wg.Wait()
	if f := failed.Load(); f != 0 {
		t.Errorf("%d streams failed before the drop", f)
	}
	waitMetric(t, ts, 0, "kinchain_live_streams")
	// Every stream that reached the handler ended as canceled; one that the
	// client dropped before it was dispatched never started.
	var ended float64
	for _, r := range []string{"client_closed", "idle_timeout", "max_duration", "shutdown", "error"} {
		if v, _, _ := metricValue(t, ts.reg, "kinchain_streams_ended_total", "reason", r); v != 0 {
			t.Errorf("%v streams ended as %s, want canceled", v, r)
		}
	}
	ended, _, _ = metricValue(t, ts.reg, "kinchain_streams_ended_total", "reason", "canceled")
	refused, _, _ := metricValue(t, ts.reg, "kinchain_requests_rejected_total", "limit", "streams")
	started, _, _ := metricValue(t, ts.reg, "kinchain_grpc_requests_total", "method", kinchainv1.KinematicsService_StreamCapture_FullMethodName)
	t.Logf("%d dropped streams: %v handled (all ended canceled: %v), %v refused for want of a slot", n, started, ended, refused)
	// Under load (CI shares two cores) more drops may still hold their slot
	// when the next stream arrives, and a stream the client dropped before
	// it was dispatched is neither handled nor refused; at least half must
	// be handled, and every handled one must have ended as canceled.
	if started != ended || started+refused > float64(n) || ended < float64(n)/2 {
		t.Errorf("%v streams handled, %v ended as canceled, %v refused, of %d", started, ended, refused, n)
	}
	// All slots are back: a whole swing streams through.
	st, err := clients[0].StreamCapture(context.Background())
	if err != nil {
		t.Fatal(err)
	}
	go func() {
		for _, m := range msgs {
			if st.Send(m) != nil {
				return
			}
		}
		_ = st.CloseSend()
	}()
	out, err := recvAll(st)
	if err != nil || len(out) == 0 || out[len(out)-1].GetSummary().GetSwings() != 1 {
		t.Errorf("full stream after the drops: %d responses, %v; want one swing in the summary", len(out), err)
	}
	for _, cc := range conns {
		cc.Close()
	}
	if err := ts.stop(); err != nil {
		t.Errorf("Serve: %v", err)
	}
	goleak.VerifyNone(t, opt)
}

// bigSession answers every batch with a large swing report (~60 KB), so
// that a client that does not read fills its flow-control window in a
// few batches.
type bigSession struct{ n int }

func bigStreams(*kinchainv1.StreamHeader) (server.StreamSession, error) { return &bigSession{}, nil }

func (s *bigSession) Push(*kinchainv1.SampleBatch) ([]*kinchainv1.StreamCaptureResponse, error) {
	rep := &kinchainv1.SwingReport{Index: int32(s.n)}
	for i := 0; i < 3000; i++ {
		rep.Events = append(rep.Events, &kinchainv1.Event{Kind: kinchainv1.EventKind_EVENT_KIND_TOP, TimeS: float64(i)})
	}
	s.n++
	return []*kinchainv1.StreamCaptureResponse{{Message: &kinchainv1.StreamCaptureResponse_Swing{Swing: rep}}}, nil
}

func (s *bigSession) Close() []*kinchainv1.StreamCaptureResponse {
	return []*kinchainv1.StreamCaptureResponse{{Message: &kinchainv1.StreamCaptureResponse_Summary{Summary: &kinchainv1.StreamSummary{Swings: int32(s.n)}}}}
}

// TestSlowReaderStream: a client that reads its responses slowly (but
// within the idle limit) gets every one of them, in order, then the
// summary; a client that stops reading altogether is ended after the idle
// limit (DEADLINE_EXCEEDED, counted as idle_timeout) instead of holding its
// stream slot, and the slot serves the next client.
func TestSlowReaderStream(t *testing.T) {
	opt := goleak.IgnoreCurrent()
	cfg := testConfig()
	cfg.MaxConcurrentStreams = 1
	cfg.StreamIdleTimeout = 400 * time.Millisecond
	ts := startServer(t, cfg, &fakeAnalyzer{}, bigStreams, false)
	// A small client window (64 KiB, no BDP growth) so that a non-reading
	// client blocks the server's sends after about one report.
	cc, err := grpc.NewClient(ts.srv.Addrs().GRPC, grpc.WithTransportCredentials(insecure.NewCredentials()),
		grpc.WithInitialWindowSize(64<<10), grpc.WithInitialConnWindowSize(64<<10))
	if err != nil {
		t.Fatal(err)
	}
	c := kinchainv1.NewKinematicsServiceClient(cc)
	const batches = 12

	t.Run("slow", func(t *testing.T) {
		st, err := c.StreamCapture(context.Background())
		if err != nil {
			t.Fatal(err)
		}
		go func() {
			_ = st.Send(header(100))
			for i := 0; i < batches; i++ {
				if st.Send(batch(float64(i)*0.1, 10)) != nil {
					return
				}
			}
			_ = st.CloseSend()
		}()
		var got []int32
		for {
			time.Sleep(50 * time.Millisecond) // a slow reader, well within the 400 ms limit
			r, err := st.Recv()
			if errors.Is(err, io.EOF) {
				break
			}
			if err != nil {
				t.Fatalf("after %d reports: %v", len(got), err)
			}
			if r.GetSwing() != nil {
				got = append(got, r.GetSwing().GetIndex())
			} else if r.GetSummary().GetSwings() != batches {
				t.Errorf("summary %v, want %d swings", r.GetSummary(), batches)
			}
		}
		for i, idx := range got {
			if idx != int32(i) {
				t.Fatalf("reports out of order or lost: %v", got)
			}
		}
		if len(got) != batches {
			t.Errorf("%d reports, want %d", len(got), batches)
		}
	})

	t.Run("stalled", func(t *testing.T) {
		ctx, cancel := context.WithCancel(context.Background())
		defer cancel()
		st, err := c.StreamCapture(ctx)
		if err != nil {
			t.Fatal(err)
		}
		sendDone := make(chan struct{})
		go func() {
			defer close(sendDone)
			_ = st.Send(header(100))
			for i := 0; i < 200; i++ {
				if st.Send(batch(float64(i)*0.1, 10)) != nil {
					return
				}
			}
		}()
		// The client reads nothing; the server must end the call.
		waitMetric(t, ts, 1, "kinchain_streams_ended_total", "reason", "idle_timeout")
		waitMetric(t, ts, 0, "kinchain_live_streams")
		// What the client reads now is a prefix of the reports in order,
		// then the idle status.
		var n int32
		for {
			r, err := st.Recv()
			if err != nil {
				if status.Code(err) != codes.DeadlineExceeded {
					t.Errorf("stalled stream ended with %v, want DeadlineExceeded", err)
				}
				break
			}
			if r.GetSwing().GetIndex() != n {
				t.Fatalf("report %d where %d was due", r.GetSwing().GetIndex(), n)
			}
			n++
		}
		cancel()
		<-sendDone
		// The one stream slot is free for the next client.
		st2, err := c.StreamCapture(context.Background())
		if err != nil {
			t.Fatal(err)
		}
		_ = st2.Send(header(100))
		_ = st2.CloseSend()
		if out, err := recvAll(st2); err != nil || len(out) != 1 || out[0].GetSummary() == nil {
			t.Errorf("next stream: %v %v", out, err)
		}
	})
	cc.Close()
	if err := ts.stop(); err != nil {
		t.Errorf("Serve: %v", err)
	}
	goleak.VerifyNone(t, opt)
}

// bigAnalyzer answers with a response of about 12 MB of JSON, larger than
// any socket buffer, so that a client that does not read blocks the write.
type bigAnalyzer struct{ fakeAnalyzer }

func (b *bigAnalyzer) AnalyzeCSV(ctx context.Context, r io.Reader, opts *kinchainv1.AnalysisOptions) (*kinchainv1.AnalyzeCaptureResponse, error) {
	resp, err := b.fakeAnalyzer.AnalyzeCSV(ctx, r, opts)
	if err != nil || resp.GetCaptureId() != "big-answer" {
		return resp, err
	}
	s := &kinchainv1.Series{}
	for i := 0; i < 600_000; i++ {
		s.TimeS = append(s.TimeS, float64(i)*1.234567e-3)
	}
	resp.Segments = []*kinchainv1.SegmentKinematics{{Series: s}}
	return resp, nil
}

// TestSlowReaderHTTP: a client that sends a request and never reads the
// (large) answer holds the server's only analysis slot no longer than
// twice the request timeout (the deadline, then as long again to write):
// then the write times out, the slot is released and the next request is
// served.
func TestSlowReaderHTTP(t *testing.T) {
	opt := goleak.IgnoreCurrent()
	cfg := testConfig()
	cfg.MaxConcurrentRequests = 1
	cfg.RequestTimeout = time.Second
	ts := startServer(t, cfg, &bigAnalyzer{}, nil, false)
	conn, err := net.Dial("tcp", ts.srv.Addrs().HTTP)
	if err != nil {
		t.Fatal(err)
	}
	if tc, ok := conn.(*net.TCPConn); ok {
		_ = tc.SetReadBuffer(4 << 10)
	}
	body := goodCSV("big-answer", 20)
	fmt.Fprintf(conn, "POST /v1/captures:analyze HTTP/1.1\r\nHost: x\r\nContent-Type: text/csv\r\nContent-Length: %d\r\n\r\n%s", len(body), body)
	// Read only the status line: the rest stays unread.
	line, err := bufio.NewReaderSize(conn, 64).ReadString('\n')
	if err != nil || !strings.Contains(line, "200") {
		t.Fatalf("status line %q, %v", line, err)
	}
	// While the write is stuck the slot is taken: 429.
	code, _, _ := httpDo(t, "POST", ts.httpURL("/v1/captures:analyze"), "text/csv", strings.NewReader(goodCSV("next", 20)))
	if code != http.StatusTooManyRequests {
		t.Errorf("while the stalled answer is written: %d, want 429", code)
	}
	// Within deadline + grace the slot comes back (bounded polling).
	served := false
	for i := 0; i < 150 && !served; i++ {
		time.Sleep(100 * time.Millisecond)
		code, _, _ = httpDo(t, "POST", ts.httpURL("/v1/captures:analyze"), "text/csv", strings.NewReader(goodCSV("next", 20)))
		served = code == http.StatusOK
	}
	if !served {
		t.Errorf("the slot never came back from the stalled reader (last %d)", code)
	}
	conn.Close()
	http.DefaultClient.CloseIdleConnections()
	if err := ts.stop(); err != nil {
		t.Errorf("Serve: %v", err)
	}
	goleak.VerifyNone(t, opt)
}

// TestCancelledDeadlines: many concurrent calls with the real engine whose
// deadlines expire or are cancelled at random moments during the analysis,
// over gRPC and HTTP. Each ends OK, DEADLINE_EXCEEDED or CANCELED (HTTP:
// 200, 504 or a client-side error) and nothing else; afterwards nothing
// is in flight, every slot is free (a full batch of calls succeeds) and no
// goroutine is left.
func TestCancelledDeadlines(t *testing.T) {
	opt := goleak.IgnoreCurrent()
	calls := 120
	if testing.Short() {
		calls = 40
	}
	cfg := testConfig()
	cfg.MaxConcurrentRequests = 8
	ts := startServer(t, cfg, engine.New(engine.Config{}), nil, false)
	cc := ts.conn()
	c := kinchainv1.NewKinematicsServiceClient(cc)
	req := &kinchainv1.AnalyzeCaptureRequest{Capture: benchCapture(t)}
	var mu sync.Mutex
	seen := map[string]int{}
	var wg sync.WaitGroup
	sem := make(chan struct{}, 4)
	for i := 0; i < calls; i++ {
		wg.Add(1)
		sem <- struct{}{}
		go func() {
			defer wg.Done()
			defer func() { <-sem }()
			d := time.Duration(1+i%40) * time.Millisecond
			ctx, cancel := context.WithTimeout(context.Background(), d)
			if i%3 == 0 {
				ctx, cancel = context.WithCancel(context.Background())
				time.AfterFunc(d, cancel)
			}
			defer cancel()
			_, err := c.AnalyzeCapture(ctx, req)
			mu.Lock()
			seen[status.Code(err).String()]++
			mu.Unlock()
		}()
	}
	wg.Wait()
	for code := range seen {
		switch code {
		// RESOURCE_EXHAUSTED: a client that gave up does not stop the
		// analysis at once (the engine checks between stages), so its
		// slot may still be taken when the next call comes.
		case "OK", "DeadlineExceeded", "Canceled", "ResourceExhausted":
		default:
			t.Errorf("gRPC outcome %s (%v)", code, seen)
		}
	}
	t.Logf("gRPC outcomes: %v", seen)
	// Server-side codes are the same set.
	for _, code := range []string{"Internal", "Unknown"} {
		if n, _, _ := metricValue(t, ts.reg, "kinchain_grpc_requests_total", "code", code); n != 0 {
			t.Errorf("server counted %v calls as %s", n, code)
		}
	}
	waitMetric(t, ts, 0, "kinchain_requests_in_flight", "transport", "grpc")
	// Every slot is free: eight calls at once all succeed.
	errs := make(chan error, 8)
	for i := 0; i < 8; i++ {
		go func() { _, err := c.AnalyzeCapture(context.Background(), req); errs <- err }()
	}
	for i := 0; i < 8; i++ {
		if err := <-errs; err != nil {
			t.Errorf("after the cancellations: %v", err)
		}
	}
	// HTTP: client timeouts mid-analysis.
	csvBody := goodCSV("h", 400)
	for i := 0; i < calls/4; i++ {
		hc := &http.Client{Timeout: time.Duration(1+i%10) * time.Millisecond}
		resp, err := hc.Post(ts.httpURL("/v1/captures:analyze"), "text/csv", strings.NewReader(csvBody))
		if err == nil {
			_, _ = io.Copy(io.Discard, resp.Body)
			resp.Body.Close()
			if resp.StatusCode != 200 && resp.StatusCode != 400 && resp.StatusCode != 504 {
				t.Errorf("HTTP %d", resp.StatusCode)
			}
		}
		hc.CloseIdleConnections()
	}
	waitMetric(t, ts, 0, "kinchain_requests_in_flight", "transport", "http")
	cc.Close()
	if err := ts.stop(); err != nil {
		t.Errorf("Serve: %v", err)
	}
	goleak.VerifyNone(t, opt)
}

// TestShutdownUnderLoad: Serve's context is cancelled (what SIGTERM does in
// kinchain serve) while clients keep calling. Calls the server accepted
// all complete OK — none is cut off within the grace period — and calls
// after that are refused cleanly: gRPC UNAVAILABLE, HTTP a refused
// connection or 503. Serve returns nil, the drain is not forced, and no
// goroutine is left.
func TestShutdownUnderLoad(t *testing.T) {
	opt := goleak.IgnoreCurrent()
	cfg := testConfig()
	cfg.MaxConcurrentRequests = 64
	cfg.ShutdownGrace = 10 * time.Second
	ts := startServer(t, cfg, engine.New(engine.Config{}), nil, false)
	cc := ts.conn()
	c := kinchainv1.NewKinematicsServiceClient(cc)
	req := &kinchainv1.AnalyzeCaptureRequest{Capture: benchCapture(t)}
	csvBody := goodCSV("h", 300)
	hc := &http.Client{Transport: &http.Transport{}}

	stop := make(chan struct{})
	var mu sync.Mutex
	outcomes := map[string]int{}
	note := func(k string) { mu.Lock(); outcomes[k]++; mu.Unlock() }
	var wg sync.WaitGroup
	for i := 0; i < 6; i++ {
		wg.Add(2)
		go func() { // gRPC client
			defer wg.Done()
			for k := 0; k < 200; k++ {
				select {
				case <-stop:
					return
				default:
				}
				_, err := c.AnalyzeCapture(context.Background(), req)
				note("grpc " + status.Code(err).String())
			}
		}()
		go func() { // HTTP client
			defer wg.Done()
			for k := 0; k < 200; k++ {
				select {
				case <-stop:
					return
				default:
				}
				resp, err := hc.Post(ts.httpURL("/v1/captures:analyze"), "text/csv", strings.NewReader(csvBody))
				if err != nil {
					note("http refused")
					continue
				}
				_, _ = io.Copy(io.Discard, resp.Body)
				resp.Body.Close()
				note(fmt.Sprintf("http %d", resp.StatusCode))
			}
		}()
	}
	time.Sleep(400 * time.Millisecond)
	if err := ts.stop(); err != nil {
		t.Errorf("Serve: %v", err)
	}
	time.Sleep(100 * time.Millisecond) // calls after the stop are refused
	close(stop)
	wg.Wait()
	t.Logf("outcomes: %v", outcomes)
	for k, n := range outcomes {
		switch k {
		case "grpc OK", "grpc Unavailable", "http 200", "http 503", "http refused":
		default:
			t.Errorf("%d calls ended %q: cut off or failed", n, k)
		}
	}
	if outcomes["grpc OK"] == 0 || outcomes["http 200"] == 0 || outcomes["grpc Unavailable"] == 0 {
		t.Errorf("outcomes %v: want completed calls on both transports and refused gRPC calls after the stop", outcomes)
	}
	// The server's own count: every call it handled completed OK.
	for _, code := range []string{"Canceled", "DeadlineExceeded", "Unavailable", "Internal", "Unknown"} {
		if n, _, _ := metricValue(t, ts.reg, "kinchain_grpc_requests_total", "code", code); n != 0 {
			t.Errorf("server counted %v handled calls as %s", n, code)
		}
	}
	if strings.Contains(ts.logs.String(), `"forced":true`) {
		t.Errorf("the drain was forced")
	}
	cc.Close()
	hc.CloseIdleConnections()
	goleak.VerifyNone(t, opt)
}
