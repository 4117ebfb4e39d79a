package server_test

import (
	"bytes"
	"context"
	"math"
	"net/http"
	"sync"
	"testing"

	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"
	"google.golang.org/protobuf/encoding/protojson"
	"google.golang.org/protobuf/proto"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/encode"
	"github.com/kinchain/kinchain/internal/engine"
	"github.com/kinchain/kinchain/internal/server"
	"github.com/kinchain/kinchain/internal/stream"
	"github.com/kinchain/kinchain/internal/synth"
)

// End-to-end tests with the real engine and the synthetic model golfer:
// whatever the transport, the server must hand back exactly what the engine
// computes for the same capture (the server only translates).

func synthRequest(t *testing.T) *kinchainv1.AnalyzeCaptureRequest {
	t.Helper()
	c, _, err := synth.Generate(synth.Config{}) // one right-handed full swing, 1000 Hz, ten segments
	if err != nil {
		t.Fatal(err)
	}
	return &kinchainv1.AnalyzeCaptureRequest{Capture: c}
}

func TestEngineGRPC(t *testing.T) {
	eng := engine.New(engine.Config{})
	req := synthRequest(t)
	want, err := eng.Analyze(context.Background(), req)
	if err != nil {
		t.Fatal(err)
	}
	if len(want.GetSwings()) != 1 {
		t.Fatalf("engine found %d swings in the one-swing model capture", len(want.GetSwings()))
	}
	ts := startServer(t, testConfig(), eng, nil, true)
	got, err := ts.client().AnalyzeCapture(context.Background(), req)
	if err != nil {
		t.Fatal(err)
	}
	if !proto.Equal(got, want) {
		t.Errorf("gRPC response differs from the engine's own result")
	}

	// The server recycles the sample arrays of a request for the next
	// ones (pool.go): captures of other lengths, rates and handedness,
	// one after the other and at once, are each answered as the engine
	// answers them alone.
	var reqs []*kinchainv1.AnalyzeCaptureRequest
	var wants []*kinchainv1.AnalyzeCaptureResponse
	for i, sc := range []synth.Config{
		{Rate: 1000, Duration: 3, LeadIn: 0.5, Tail: 0.3},
		{Rate: 500, Duration: 4, LeadIn: 1, Tail: 0.5, Handedness: kinchainv1.Handedness_HANDEDNESS_LEFT},
		{Rate: 1000, Duration: 3.2, LeadIn: 0.6, Tail: 0.4, Swings: 1},
		{Rate: 240, Duration: 3, LeadIn: 0.5, Tail: 0.3},
	} {
		c, _, err := synth.Generate(sc)
		if err != nil {
			t.Fatalf("capture %d: %v", i, err)
		}
		r := &kinchainv1.AnalyzeCaptureRequest{Capture: c, Options: &kinchainv1.AnalysisOptions{IncludeSeries: i%2 == 0}}
		w, err := eng.Analyze(context.Background(), r)
		if err != nil {
			t.Fatalf("capture %d: %v", i, err)
		}
		reqs, wants = append(reqs, r), append(wants, w)
	}
	for round := 0; round < 3; round++ {
		var wg sync.WaitGroup
		for i := range reqs {
			wg.Add(1)
			go func() {
				defer wg.Done()
				got, err := ts.client().AnalyzeCapture(context.Background(), reqs[i])
				if err != nil {
					t.Errorf("round %d, capture %d: %v", round, i, err)
				} else if !proto.Equal(got, wants[i]) {
					t.Errorf("round %d, capture %d: the response differs from the engine's own result", round, i)
				}
			}()
			if round == 0 {
				wg.Wait() // one after the other first
			}
		}
		wg.Wait()
	}

	// Bad input through the real engine: a NaN sample is named with its
	// track and sample, relative to the request.
	bad := proto.Clone(req).(*kinchainv1.AnalyzeCaptureRequest)
	bad.Capture.Tracks[2].Qx[100] = math.NaN()
	_, err = ts.client().AnalyzeCapture(context.Background(), bad)
	if status.Code(err) != codes.InvalidArgument {
		t.Fatalf("NaN sample: %v, want InvalidArgument", err)
	}
	if f := badRequest(t, err).GetFieldViolations()[0].GetField(); f != "capture.tracks[2].qx[100]" {
		t.Errorf("field = %q, want capture.tracks[2].qx[100]", f)
	}
}

func TestEngineHTTP(t *testing.T) {
	eng := engine.New(engine.Config{})
	req := synthRequest(t)
	want, err := eng.Analyze(context.Background(), req)
	if err != nil {
		t.Fatal(err)
	}
	ts := startServer(t, testConfig(), eng, nil, false)

	body, err := protojson.Marshal(req)
	if err != nil {
		t.Fatal(err)
	}
	code, _, b := httpDo(t, http.MethodPost, ts.httpURL("/v1/captures:analyze"), "application/json", bytes.NewReader(body))
	if code != http.StatusOK {
		t.Fatalf("JSON: %d %s", code, b)
	}
	var got kinchainv1.AnalyzeCaptureResponse
	if err := protojson.Unmarshal(b, &got); err != nil {
		t.Fatal(err)
	}
	if !proto.Equal(&got, want) {
		t.Errorf("JSON gateway response differs from the engine's own result")
	}

	// The same capture as CSV, as curl -T would send it.
	var csv bytes.Buffer
	if err := encode.WriteCaptureCSV(&csv, req.GetCapture()); err != nil {
		t.Fatal(err)
	}
	wantCSV, err := eng.AnalyzeCSV(context.Background(), bytes.NewReader(csv.Bytes()), &kinchainv1.AnalysisOptions{Speed: kinchainv1.SpeedDefinition_SPEED_DEFINITION_VERTICAL})
	if err != nil {
		t.Fatal(err)
	}
	code, _, b = httpDo(t, http.MethodPut, ts.httpURL("/v1/captures:analyze?speed=vertical"), "", bytes.NewReader(csv.Bytes()))
	if code != http.StatusOK {
		t.Fatalf("CSV: %d %s", code, b)
	}
	var gotCSV kinchainv1.AnalyzeCaptureResponse
	if err := protojson.Unmarshal(b, &gotCSV); err != nil {
		t.Fatal(err)
	}
	if !proto.Equal(&gotCSV, wantCSV) {
		t.Errorf("CSV upload response differs from the engine's own result for the same file")
	}
	if gotCSV.GetSpeed() != kinchainv1.SpeedDefinition_SPEED_DEFINITION_VERTICAL || len(gotCSV.GetSwings()) != 1 {
		t.Errorf("CSV upload: speed %v, %d swings", gotCSV.GetSpeed(), len(gotCSV.GetSwings()))
	}
}

// TestEngineStream replays the model golfer over StreamCapture with the
// real stream sessions, in 100 ms batches, and checks the protocol's
// outcome: events while streaming, one swing report, and a summary naming
// one swing and every sample.
func TestEngineStream(t *testing.T) {
	c := synthRequest(t).GetCapture()
	streams := func(h *kinchainv1.StreamHeader) (server.StreamSession, error) {
		s, err := stream.NewSession(h, stream.Limits{})
		if err != nil {
			return nil, err
		}
		return s, nil
	}
	ts := startServer(t, testConfig(), engine.New(engine.Config{}), streams, true)
	st, err := ts.client().StreamCapture(context.Background())
	if err != nil {
		t.Fatal(err)
	}
	h := &kinchainv1.StreamHeader{CaptureId: c.GetCaptureId(), Handedness: c.GetHandedness(), RateHz: 1000}
	total := 0
	for _, tr := range c.GetTracks() {
		h.Segments = append(h.Segments, tr.GetSegment())
		total += len(tr.GetTimeS())
	}
	type result struct {
		out []*kinchainv1.StreamCaptureResponse
		err error
	}
	got := make(chan result, 1)
	go func() {
		out, err := recvAll(st)
		got <- result{out, err}
	}()
	if err := st.Send(&kinchainv1.StreamCaptureRequest{Message: &kinchainv1.StreamCaptureRequest_Header{Header: h}}); err != nil {
		t.Fatal(err)
	}
	n := len(c.GetTracks()[0].GetTimeS())
	for k := 0; k < n; k += 100 {
		e := min(k+100, n)
		b := &kinchainv1.SampleBatch{}
		for _, tr := range c.GetTracks() {
			b.Tracks = append(b.Tracks, &kinchainv1.Track{Segment: tr.GetSegment(), TimeS: tr.GetTimeS()[k:e],
				Qw: tr.GetQw()[k:e], Qx: tr.GetQx()[k:e], Qy: tr.GetQy()[k:e], Qz: tr.GetQz()[k:e]})
		}
		if err := st.Send(&kinchainv1.StreamCaptureRequest{Message: &kinchainv1.StreamCaptureRequest_Batch{Batch: b}}); err != nil {
			break // the server ended the call; its status comes from Recv
		}
	}
	_ = st.CloseSend()
	r := <-got
	if r.err != nil {
		t.Fatalf("stream: %v", r.err)
	}
	var events, swings int
	var sum *kinchainv1.StreamSummary
	for _, m := range r.out {
		switch {
		case m.GetEvent() != nil:
			events++
		case m.GetSwing() != nil:
			swings++
		case m.GetSummary() != nil:
			sum = m.GetSummary()
		}
	}
	if events == 0 || swings != 1 || sum == nil || sum.GetSwings() != 1 || sum.GetSamples() != int64(total) {
		t.Errorf("events %d, swing reports %d, summary %v; want events, 1 report, a summary of 1 swing and %d samples", events, swings, sum, total)
	}
	if last := r.out[len(r.out)-1]; last.GetSummary() == nil {
		t.Errorf("the last response is not the summary: %v", last)
	}
}
