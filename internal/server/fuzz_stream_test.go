package server

import (
	"context"
	"encoding/json"
	"errors"
	"io"
	"log/slog"
	"os"
	"path/filepath"
	"testing"

	"github.com/prometheus/client_golang/prometheus"
	"google.golang.org/genproto/googleapis/rpc/errdetails"
	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/metadata"
	"google.golang.org/grpc/status"
	"google.golang.org/protobuf/encoding/protojson"
	"google.golang.org/protobuf/encoding/protowire"
	"google.golang.org/protobuf/proto"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/stream"
)

// fuzzStream is an in-memory StreamCapture call: RecvMsg hands out the
// given messages' bytes and then io.EOF (the client's half-close); Send
// records the responses.
type fuzzStream struct {
	grpc.ServerStream
	ctx  context.Context
	in   [][]byte
	sent []*kinchainv1.StreamCaptureResponse
}

func (f *fuzzStream) Context() context.Context     { return f.ctx }
func (f *fuzzStream) SetHeader(metadata.MD) error  { return nil }
func (f *fuzzStream) SendHeader(metadata.MD) error { return nil }
func (f *fuzzStream) SetTrailer(metadata.MD)       {}
func (f *fuzzStream) SendMsg(m any) error          { return f.Send(m.(*kinchainv1.StreamCaptureResponse)) }

func (f *fuzzStream) Send(r *kinchainv1.StreamCaptureResponse) error {
	f.sent = append(f.sent, r)
	return nil
}

func (f *fuzzStream) Recv() (*kinchainv1.StreamCaptureRequest, error) {
	return nil, errors.New("the handler must receive raw messages")
}

func (f *fuzzStream) RecvMsg(m any) error {
	if len(f.in) == 0 {
		return io.EOF
	}
	*m.(*rawMessage) = rawMessage{b: f.in[0]}
	f.in = f.in[1:]
	return nil
}

// splitMessages cuts fuzz input into messages: each is a varint length
// followed by that many bytes (the last one takes what is left).
func splitMessages(b []byte) [][]byte {
	var out [][]byte
	for len(b) > 0 && len(out) < 256 {
		n, k := protowire.ConsumeVarint(b)
		if k < 0 {
			return append(out, b)
		}
		b = b[k:]
		if n > uint64(len(b)) {
			n = uint64(len(b))
		}
		out = append(out, b[:n])
		b = b[n:]
	}
	return out
}

// joinMessages is splitMessages' inverse, for seeds.
func joinMessages(msgs ...proto.Message) []byte {
	var b []byte
	for _, m := range msgs {
		w, _ := proto.Marshal(m)
		b = protowire.AppendBytes(b, w)
	}
	return b
}

// newFuzzServer is a Server with just what the stream handler uses, and
// the real stream sessions (stream.NewSession with the default limits).
func newFuzzServer(tb testing.TB) *Server {
	m, err := newMetrics(prometheus.NewRegistry())
	if err != nil {
		tb.Fatal(err)
	}
	return &Server{
		cfg: DefaultConfig(), log: slog.New(slog.NewTextHandler(io.Discard, nil)), metrics: m,
		draining: make(chan struct{}),
		streams: func(h *kinchainv1.StreamHeader) (StreamSession, error) {
			s, err := stream.NewSession(h, stream.Limits{})
			if err != nil {
				return nil, err
			}
			return s, nil
		},
	}
}

// FuzzStream drives the StreamCapture handler — message decoding, the
// protocol state machine and the real stream sessions — with arbitrary
// bytes cut into messages. Whatever they are, the call must end OK with a
// StreamSummary as its last response, or with INVALID_ARGUMENT carrying a
// field violation; never another code, never a panic. Seeds: every stream
// of testdata/bad-stream, and good streams.
func FuzzStream(f *testing.F) {
	for _, msgs := range badStreams(f) {
		f.Add(joinMessages(msgs...))
	}
	f.Add(joinMessages(fuzzHeader(), fuzzBatch(0, 40), fuzzBatch(0.4, 40)))
	f.Add(joinMessages(fuzzHeader()))
	f.Add([]byte{})

	s := newFuzzServer(f)
	f.Fuzz(func(t *testing.T, b []byte) {
		if len(b) > 1<<16 {
			return // bounded time per input
		}
		fs := &fuzzStream{ctx: context.Background(), in: splitMessages(b)}
		err := s.runStream(fs)
		if err == nil {
			if len(fs.sent) == 0 || fs.sent[len(fs.sent)-1].GetSummary() == nil {
				t.Fatalf("OK without a summary last: %v", fs.sent)
			}
			return
		}
		st, ok := status.FromError(err)
		if !ok || st.Code() != codes.InvalidArgument {
			t.Fatalf("status %v, want OK or InvalidArgument", err)
		}
		for _, d := range st.Details() {
			if br, ok := d.(*errdetails.BadRequest); ok && len(br.GetFieldViolations()) > 0 && br.GetFieldViolations()[0].GetField() != "" {
				return
			}
		}
		t.Fatalf("InvalidArgument without a field violation: %v", err)
	})
}

func fuzzHeader() *kinchainv1.StreamCaptureRequest {
	return &kinchainv1.StreamCaptureRequest{Message: &kinchainv1.StreamCaptureRequest_Header{Header: &kinchainv1.StreamHeader{
		CaptureId: "fuzz", RateHz: 100, Segments: []kinchainv1.Segment{kinchainv1.Segment_SEGMENT_PELVIS, kinchainv1.Segment_SEGMENT_CLUB},
	}}}
}

func fuzzBatch(t0 float64, n int) *kinchainv1.StreamCaptureRequest {
	sb := &kinchainv1.SampleBatch{}
	for _, seg := range []kinchainv1.Segment{kinchainv1.Segment_SEGMENT_PELVIS, kinchainv1.Segment_SEGMENT_CLUB} {
		tr := &kinchainv1.Track{Segment: seg}
		for i := 0; i < n; i++ {
			tr.TimeS = append(tr.TimeS, t0+float64(i)/100)
			tr.Qw, tr.Qx, tr.Qy, tr.Qz = append(tr.Qw, 1), append(tr.Qx, 0), append(tr.Qy, 0), append(tr.Qz, 0)
		}
		sb.Tracks = append(sb.Tracks, tr)
	}
	return &kinchainv1.StreamCaptureRequest{Message: &kinchainv1.StreamCaptureRequest_Batch{Batch: sb}}
}

// badStreams returns the messages of every stream of testdata/bad-stream
// (those protojson reads; a file's own mistakes may leave some out).
func badStreams(tb testing.TB) [][]proto.Message {
	tb.Helper()
	files, err := filepath.Glob(filepath.Join("..", "..", "testdata", "bad-stream", "*.json"))
	if err != nil || len(files) == 0 {
		tb.Fatalf("no bad-stream corpus: %v", err)
	}
	var out [][]proto.Message
	for _, name := range files {
		b, err := os.ReadFile(name)
		if err != nil {
			tb.Fatal(err)
		}
		var c struct {
			Messages []json.RawMessage `json:"messages"`
		}
		if json.Unmarshal(b, &c) != nil {
			continue
		}
		var msgs []proto.Message
		for _, m := range c.Messages {
			r := &kinchainv1.StreamCaptureRequest{}
			if protojson.Unmarshal(m, r) == nil {
				msgs = append(msgs, r)
			}
		}
		out = append(out, msgs)
	}
	return out
}
