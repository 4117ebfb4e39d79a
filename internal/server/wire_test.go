package server_test

import (
	"context"
	"testing"

	"google.golang.org/protobuf/encoding/protowire"
	"google.golang.org/protobuf/proto"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
)

// TestMalformedMessages: messages gRPC's own codec would report as
// INTERNAL (they do not parse) or would decode into far more memory than
// their size are INVALID_ARGUMENT naming the message, counted and logged
// like other bad requests; the server keeps serving.
func TestMalformedMessages(t *testing.T) {
	ts := startServer(t, testConfig(), &fakeAnalyzer{}, fakeStreams, true)
	cc := ts.conn()
	call := func(b []byte) error {
		return cc.Invoke(context.Background(), kinchainv1.KinematicsService_AnalyzeCapture_FullMethodName, &b, &kinchainv1.AnalyzeCaptureResponse{}, rawCallOption())
	}
	// Not protobuf at all: a tag with field number 0.
	checkViolation(t, call([]byte{0x00, 0x01}), "request", "MALFORMED", 0)
	// The options field runs past the end.
	checkViolation(t, call([]byte{0x12, 0x40, 0x01}), "options", "MALFORMED", 0)
	// A capture of 100,000 empty tracks (200 KB that would be ~50 MB):
	// decode's reader refuses it on the wire.
	var bomb []byte
	for i := 0; i < 100_000; i++ {
		bomb = protowire.AppendTag(bomb, 4, protowire.BytesType)
		bomb = protowire.AppendBytes(bomb, nil)
	}
	checkViolation(t, call(captureField(bomb)), "capture.tracks", "TOO_LARGE", 0)
	// Options padded with 100,000 empty neutral windows: the server's
	// expansion check refuses them before proto.Unmarshal (it charges each
	// occurrence as a new message: conservative for a singular field,
	// which protobuf merges, and exact for repeated ones).
	var opts []byte
	for i := 0; i < 100_000; i++ {
		opts = protowire.AppendTag(opts, 11, protowire.BytesType)
		opts = protowire.AppendBytes(opts, nil)
	}
	req := protowire.AppendBytes(protowire.AppendTag(nil, 2, protowire.BytesType), opts)
	checkViolation(t, call(req), "options", "TOO_LARGE", 0)

	// Streams: a batch of 100,000 empty tracks is refused as "message".
	var tracks []byte
	for i := 0; i < 100_000; i++ {
		tracks = protowire.AppendTag(tracks, 1, protowire.BytesType)
		tracks = protowire.AppendBytes(tracks, nil)
	}
	batchMsg := protowire.AppendBytes(protowire.AppendTag(nil, 2, protowire.BytesType), tracks)
	hdr, _ := proto.Marshal(header(100))
	desc := kinchainv1.KinematicsService_ServiceDesc.Streams[0]
	st, err := cc.NewStream(context.Background(), &desc, kinchainv1.KinematicsService_StreamCapture_FullMethodName, rawCallOption())
	if err != nil {
		t.Fatal(err)
	}
	if err := st.SendMsg(&hdr); err != nil {
		t.Fatal(err)
	}
	_ = st.SendMsg(&batchMsg)
	err = st.RecvMsg(&kinchainv1.StreamCaptureResponse{})
	checkViolation(t, err, "message", "TOO_LARGE", 0)
	// Garbage as a stream message.
	st, err = cc.NewStream(context.Background(), &desc, kinchainv1.KinematicsService_StreamCapture_FullMethodName, rawCallOption())
	if err != nil {
		t.Fatal(err)
	}
	garbage := []byte{0xff, 0xff, 0xff}
	_ = st.SendMsg(&garbage)
	checkViolation(t, st.RecvMsg(&kinchainv1.StreamCaptureResponse{}), "message", "MALFORMED", 0)

	if n, _, _ := metricValue(t, ts.reg, "kinchain_validation_failures_total", "reason", "too_large"); n < 2 {
		t.Errorf("validation_failures_total{too_large} = %v, want ≥ 2", n)
	}
	if _, err := ts.client().AnalyzeCapture(context.Background(), &kinchainv1.AnalyzeCaptureRequest{Capture: goodCapture("after", 20)}); err != nil {
		t.Errorf("after the malformed messages: %v", err)
	}
}
