package server_test

import (
	"context"
	"encoding/json"
	"strings"
	"testing"
	"time"

	"google.golang.org/genproto/googleapis/rpc/errdetails"
	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	healthpb "google.golang.org/grpc/health/grpc_health_v1"
	"google.golang.org/grpc/metadata"
	reflectionpb "google.golang.org/grpc/reflection/grpc_reflection_v1"
	"google.golang.org/grpc/status"
	"google.golang.org/protobuf/proto"
	"google.golang.org/protobuf/types/descriptorpb"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
)

func badRequest(t *testing.T, err error) *errdetails.BadRequest {
	t.Helper()
	st := status.Convert(err)
	for _, d := range st.Details() {
		if br, ok := d.(*errdetails.BadRequest); ok {
			return br
		}
	}
	t.Fatalf("status %v has no BadRequest detail", st)
	return nil
}

func TestUnaryAnalyze(t *testing.T) {
	for _, bc := range []bool{true, false} {
		name := map[bool]string{true: "bufconn", false: "socket"}[bc]
		t.Run(name, func(t *testing.T) {
			ts := startServer(t, testConfig(), &fakeAnalyzer{}, fakeStreams, bc)
			c := ts.client()
			ctx := metadata.AppendToOutgoingContext(context.Background(), "x-request-id", "req-42")
			var hdr metadata.MD
			cut := 12.5
			resp, err := c.AnalyzeCapture(ctx, &kinchainv1.AnalyzeCaptureRequest{
				Capture: goodCapture("unary-1", 50),
				Options: &kinchainv1.AnalysisOptions{CutoffHz: &cut, Speed: kinchainv1.SpeedDefinition_SPEED_DEFINITION_VERTICAL},
			}, grpc.Header(&hdr))
			if err != nil {
				t.Fatal(err)
			}
			if resp.GetCaptureId() != "unary-1" || len(resp.GetQuality().GetTracks()) != 2 || resp.GetQuality().GetTracks()[0].GetSamples() != 50 {
				t.Errorf("response does not echo the request: %v", resp)
			}
			if resp.GetSampleRateHz() != 12.5 || resp.GetSpeed() != kinchainv1.SpeedDefinition_SPEED_DEFINITION_VERTICAL {
				t.Errorf("options did not arrive: %v", resp)
			}
			if got := hdr.Get("x-request-id"); len(got) != 1 || got[0] != "req-42" {
				t.Errorf("x-request-id header = %v, want the client's req-42", got)
			}
			// The request id is in the call's log line.
			if !strings.Contains(ts.logs.String(), `"request_id":"req-42"`) {
				t.Errorf("log has no request_id req-42:\n%s", ts.logs.String())
			}
		})
	}
}

func TestUnaryGeneratesRequestID(t *testing.T) {
	ts := startServer(t, testConfig(), &fakeAnalyzer{}, nil, true)
	var hdr metadata.MD
	if _, err := ts.client().AnalyzeCapture(context.Background(), &kinchainv1.AnalyzeCaptureRequest{Capture: goodCapture("x", 20)}, grpc.Header(&hdr)); err != nil {
		t.Fatal(err)
	}
	if got := hdr.Get("x-request-id"); len(got) != 1 || len(got[0]) != 32 {
		t.Errorf("generated x-request-id = %v, want 32 hex digits", got)
	}
	// A request id with characters outside the accepted set is replaced.
	ctx := metadata.AppendToOutgoingContext(context.Background(), "x-request-id", "bad id with spaces")
	if _, err := ts.client().AnalyzeCapture(ctx, &kinchainv1.AnalyzeCaptureRequest{Capture: goodCapture("x", 20)}, grpc.Header(&hdr)); err != nil {
		t.Fatal(err)
	}
	if got := hdr.Get("x-request-id"); len(got) != 1 || len(got[0]) != 32 {
		t.Errorf("x-request-id = %v, want a generated one", got)
	}
}

func TestUnaryInvalidArgument(t *testing.T) {
	ts := startServer(t, testConfig(), &fakeAnalyzer{}, nil, true)
	c := ts.client()
	cp := goodCapture("bad", 30)
	cp.Tracks[1].TimeS[7] = cp.Tracks[1].TimeS[6] // duplicate time at sample 7 of track 1
	var tr metadata.MD
	ctx := metadata.AppendToOutgoingContext(context.Background(), "x-request-id", "bad-1")
	_, err := c.AnalyzeCapture(ctx, &kinchainv1.AnalyzeCaptureRequest{Capture: cp}, grpc.Trailer(&tr))
	if status.Code(err) != codes.InvalidArgument {
		t.Fatalf("code = %v, want InvalidArgument: %v", status.Code(err), err)
	}
	// On errors the request id comes back in the trailer.
	if got := tr.Get("x-request-id"); len(got) != 1 || got[0] != "bad-1" {
		t.Errorf("x-request-id trailer = %v", got)
	}
	br := badRequest(t, err)
	if len(br.GetFieldViolations()) != 1 {
		t.Fatalf("violations = %v, want one", br)
	}
	v := br.GetFieldViolations()[0]
	if v.GetField() != "capture.tracks[1].time_s[7]" || v.GetReason() != "DUPLICATE_TIME" || !strings.Contains(v.GetDescription(), "time_s[7]") {
		t.Errorf("violation = %v, want field capture.tracks[1].time_s[7], reason DUPLICATE_TIME", v)
	}

	// No capture at all.
	_, err = c.AnalyzeCapture(context.Background(), &kinchainv1.AnalyzeCaptureRequest{})
	if status.Code(err) != codes.InvalidArgument || badRequest(t, err).GetFieldViolations()[0].GetField() != "capture" {
		t.Errorf("empty request: %v, want InvalidArgument naming capture", err)
	}

	// Bad options are named relative to the request.
	bad := -3.0
	_, err = c.AnalyzeCapture(context.Background(), &kinchainv1.AnalyzeCaptureRequest{Capture: goodCapture("o", 30), Options: &kinchainv1.AnalysisOptions{CutoffHz: &bad}})
	if status.Code(err) != codes.InvalidArgument || badRequest(t, err).GetFieldViolations()[0].GetField() != "options.cutoff_hz" {
		t.Errorf("bad cutoff: %v, want InvalidArgument naming options.cutoff_hz", err)
	}
	// The log line of an INVALID_ARGUMENT call names the field, not the
	// error text (which may quote capture values).
	if !strings.Contains(ts.logs.String(), `"grpc.error_fields":"capture.tracks[1].time_s[7]"`) {
		t.Errorf("log lacks the violation's field:\n%s", ts.logs.String())
	}
}

func TestUnaryPanicAndInternal(t *testing.T) {
	ts := startServer(t, testConfig(), &fakeAnalyzer{}, nil, true)
	c := ts.client()
	_, err := c.AnalyzeCapture(context.Background(), &kinchainv1.AnalyzeCaptureRequest{Capture: &kinchainv1.Capture{CaptureId: "panic"}})
	if status.Code(err) != codes.Internal || strings.Contains(err.Error(), "test panic") {
		t.Errorf("panic: %v, want Internal without the panic text", err)
	}
	_, err = c.AnalyzeCapture(context.Background(), &kinchainv1.AnalyzeCaptureRequest{Capture: &kinchainv1.Capture{CaptureId: "internal"}})
	if status.Code(err) != codes.Internal || strings.Contains(err.Error(), "disk on fire") {
		t.Errorf("internal: %v, want Internal without the cause", err)
	}
	logs := ts.logs.String()
	if !strings.Contains(logs, "panic recovered") || !strings.Contains(logs, "disk on fire") {
		t.Errorf("log lacks the panic or the internal cause:\n%s", logs)
	}
	// The server still works.
	if _, err := c.AnalyzeCapture(context.Background(), &kinchainv1.AnalyzeCaptureRequest{Capture: goodCapture("after", 20)}); err != nil {
		t.Errorf("after panic: %v", err)
	}
}

func TestUnaryCanceledAndDeadline(t *testing.T) {
	fa := &fakeAnalyzer{gate: make(chan struct{}), started: make(chan struct{}, 4)}
	defer close(fa.gate)
	ts := startServer(t, testConfig(), fa, nil, true)
	c := ts.client()

	ctx, cancel := context.WithTimeout(context.Background(), 50*time.Millisecond)
	defer cancel()
	_, err := c.AnalyzeCapture(ctx, &kinchainv1.AnalyzeCaptureRequest{Capture: goodCapture("slow", 20)})
	if status.Code(err) != codes.DeadlineExceeded {
		t.Errorf("client deadline: %v, want DeadlineExceeded", err)
	}

	// The server's default deadline applies to a call without one.
	cfg := testConfig()
	cfg.RequestTimeout = 50 * time.Millisecond
	ts2 := startServer(t, cfg, fa, nil, true)
	_, err = ts2.client().AnalyzeCapture(context.Background(), &kinchainv1.AnalyzeCaptureRequest{Capture: goodCapture("slow", 20)})
	if status.Code(err) != codes.DeadlineExceeded {
		t.Errorf("server default deadline: %v, want DeadlineExceeded", err)
	}
}

func TestResourceExhaustedWhenSaturated(t *testing.T) {
	fa := &fakeAnalyzer{gate: make(chan struct{}), started: make(chan struct{}, 8)}
	cfg := testConfig()
	cfg.MaxConcurrentRequests = 2
	ts := startServer(t, cfg, fa, nil, true)
	c := ts.client()
	errs := make(chan error, 2)
	for i := 0; i < 2; i++ {
		go func() {
			_, err := c.AnalyzeCapture(context.Background(), &kinchainv1.AnalyzeCaptureRequest{Capture: goodCapture("hold", 20)})
			errs <- err
		}()
	}
	<-fa.started
	<-fa.started
	// A queued call would wait for the gate and end in DeadlineExceeded.
	ctx, cancel := context.WithTimeout(context.Background(), 10*time.Second)
	defer cancel()
	_, err := c.AnalyzeCapture(ctx, &kinchainv1.AnalyzeCaptureRequest{Capture: goodCapture("third", 20)})
	if status.Code(err) != codes.ResourceExhausted {
		t.Errorf("third call: %v, want ResourceExhausted", err)
	}
	var ri *errdetails.RetryInfo
	for _, d := range status.Convert(err).Details() {
		if r, ok := d.(*errdetails.RetryInfo); ok {
			ri = r
		}
	}
	if ri == nil || ri.GetRetryDelay().AsDuration() <= 0 {
		t.Errorf("no RetryInfo in %v", status.Convert(err).Details())
	}
	// Health checks are not subject to the limit.
	hc := healthpb.NewHealthClient(ts.conn())
	if r, err := hc.Check(context.Background(), &healthpb.HealthCheckRequest{}); err != nil || r.GetStatus() != healthpb.HealthCheckResponse_SERVING {
		t.Errorf("health while saturated: %v %v", r, err)
	}
	close(fa.gate)
	for i := 0; i < 2; i++ {
		if err := <-errs; err != nil {
			t.Errorf("held call: %v", err)
		}
	}
}

func TestMaxRecvMsgSize(t *testing.T) {
	cfg := testConfig()
	cfg.MaxRecvMsgBytes = 4 << 10
	ts := startServer(t, cfg, &fakeAnalyzer{}, nil, true)
	_, err := ts.client().AnalyzeCapture(context.Background(), &kinchainv1.AnalyzeCaptureRequest{Capture: goodCapture("big", 1000)})
	if status.Code(err) != codes.ResourceExhausted {
		t.Errorf("oversized message: %v, want ResourceExhausted", err)
	}
}

func TestHealth(t *testing.T) {
	ts := startServer(t, testConfig(), &fakeAnalyzer{}, nil, false)
	hc := healthpb.NewHealthClient(ts.conn())
	for _, svc := range []string{"", "kinchain.v1.KinematicsService"} {
		r, err := hc.Check(context.Background(), &healthpb.HealthCheckRequest{Service: svc})
		if err != nil || r.GetStatus() != healthpb.HealthCheckResponse_SERVING {
			t.Errorf("Check(%q) = %v, %v; want SERVING", svc, r, err)
		}
	}
	if _, err := hc.Check(context.Background(), &healthpb.HealthCheckRequest{Service: "no.such.Service"}); status.Code(err) != codes.NotFound {
		t.Errorf("unknown service: %v, want NotFound", err)
	}
}

func TestReflection(t *testing.T) {
	ts := startServer(t, testConfig(), &fakeAnalyzer{}, nil, false)
	rc := reflectionpb.NewServerReflectionClient(ts.conn())
	st, err := rc.ServerReflectionInfo(context.Background())
	if err != nil {
		t.Fatal(err)
	}
	defer st.CloseSend()
	ask := func(req *reflectionpb.ServerReflectionRequest) *reflectionpb.ServerReflectionResponse {
		t.Helper()
		if err := st.Send(req); err != nil {
			t.Fatal(err)
		}
		r, err := st.Recv()
		if err != nil {
			t.Fatal(err)
		}
		return r
	}
	list := ask(&reflectionpb.ServerReflectionRequest{MessageRequest: &reflectionpb.ServerReflectionRequest_ListServices{}})
	var names []string
	for _, s := range list.GetListServicesResponse().GetService() {
		names = append(names, s.GetName())
	}
	want := []string{"kinchain.v1.KinematicsService", "grpc.health.v1.Health", "grpc.reflection.v1.ServerReflection"}
	for _, w := range want {
		found := false
		for _, n := range names {
			found = found || n == w
		}
		if !found {
			t.Errorf("ListServices = %v, lacks %s", names, w)
		}
	}
	// Describe the service: the file holding it declares both methods.
	fr := ask(&reflectionpb.ServerReflectionRequest{MessageRequest: &reflectionpb.ServerReflectionRequest_FileContainingSymbol{FileContainingSymbol: "kinchain.v1.KinematicsService"}})
	files := fr.GetFileDescriptorResponse().GetFileDescriptorProto()
	if len(files) == 0 {
		t.Fatalf("no file descriptor: %v", fr)
	}
	var fd descriptorpb.FileDescriptorProto
	if err := proto.Unmarshal(files[0], &fd); err != nil {
		t.Fatal(err)
	}
	var methods []string
	for _, s := range fd.GetService() {
		if s.GetName() == "KinematicsService" {
			for _, m := range s.GetMethod() {
				methods = append(methods, m.GetName())
				if m.GetName() == "StreamCapture" && !(m.GetClientStreaming() && m.GetServerStreaming()) {
					t.Errorf("StreamCapture is not bidirectional in the descriptor")
				}
			}
		}
	}
	if strings.Join(methods, ",") != "AnalyzeCapture,StreamCapture" {
		t.Errorf("methods = %v", methods)
	}

	// Reflection off: the service is not registered.
	cfg := testConfig()
	cfg.Reflection = false
	ts2 := startServer(t, cfg, &fakeAnalyzer{}, nil, false)
	st2, err := reflectionpb.NewServerReflectionClient(ts2.conn()).ServerReflectionInfo(context.Background())
	if err == nil {
		_ = st2.Send(&reflectionpb.ServerReflectionRequest{MessageRequest: &reflectionpb.ServerReflectionRequest_ListServices{}})
		_, err = st2.Recv()
	}
	if status.Code(err) != codes.Unimplemented {
		t.Errorf("reflection off: %v, want Unimplemented", err)
	}
}

// TestConfigLogValue checks that the configuration renders as one JSON
// object with readable durations.
func TestConfigLogValue(t *testing.T) {
	var b syncBuffer
	log := newJSONLogger(&b)
	log.Info("cfg", "config", testConfig())
	var m map[string]any
	if err := json.Unmarshal([]byte(b.String()), &m); err != nil {
		t.Fatalf("not one JSON line: %v\n%s", err, b.String())
	}
	c, _ := m["config"].(map[string]any)
	if c["request_timeout"] != "30s" || c["reflection"] != true || c["max_recv_msg_bytes"] != float64(64<<20) {
		t.Errorf("config = %v", c)
	}
}
