package server

import (
	"errors"
	"math"
	"testing"

	"google.golang.org/protobuf/encoding/protowire"
	"google.golang.org/protobuf/proto"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/validate"
)

// agreeStream checks decodeStreamRequest against proto.Unmarshal (the
// reference, google.golang.org/protobuf): the same success or failure and,
// on success, equal messages.
func agreeStream(t *testing.T, b []byte) {
	t.Helper()
	want := &kinchainv1.StreamCaptureRequest{}
	werr := proto.Unmarshal(b, want)
	got, err := decodeStreamRequest(b)
	if err != nil {
		if werr == nil && checkExpansion(b, want.ProtoReflect().Descriptor(), "message") == nil {
			t.Fatalf("decodeStreamRequest fails (%v), proto.Unmarshal does not", err)
		}
		return
	}
	if werr != nil {
		t.Fatalf("decodeStreamRequest decodes what proto.Unmarshal refuses (%v)", werr)
	}
	if !proto.Equal(got, want) {
		t.Fatalf("decodeStreamRequest differs from proto.Unmarshal:\ngot  %v\nwant %v", got, want)
	}
}

// TestDecodeStreamRequest: batches (the fast path), headers, and messages
// that must take proto.Unmarshal's way — a batch and a header in one
// message (the last oneof member wins), a batch field given twice (merged),
// an unknown field beside the batch or inside it, unpacked and split
// sample arrays — plus every message of testdata/bad-stream.
func TestDecodeStreamRequest(t *testing.T) {
	enc := func(m proto.Message) []byte { b, _ := proto.Marshal(m); return b }
	batch := enc(fuzzBatch(0, 40))
	header := enc(fuzzHeader())
	unknown := protowire.AppendVarint(protowire.AppendTag(nil, 99, protowire.VarintType), 7)
	var inner []byte // a batch whose track has unpacked and split arrays and an unknown field
	{
		var tr []byte
		tr = protowire.AppendVarint(protowire.AppendTag(tr, 1, protowire.VarintType), uint64(kinchainv1.Segment_SEGMENT_PELVIS))
		for _, x := range []float64{0, 0.01} {
			tr = protowire.AppendFixed64(protowire.AppendTag(tr, 2, protowire.Fixed64Type), math.Float64bits(x))
		}
		tr = protowire.AppendBytes(protowire.AppendTag(tr, 3, protowire.BytesType), protowire.AppendFixed64(nil, math.Float64bits(1)))
		tr = append(tr, unknown...)
		tr = protowire.AppendBytes(protowire.AppendTag(tr, 3, protowire.BytesType), protowire.AppendFixed64(nil, math.Float64bits(1)))
		inner = protowire.AppendBytes(protowire.AppendTag(nil, 1, protowire.BytesType), tr)
	}
	wrap := func(v []byte) []byte {
		return protowire.AppendBytes(protowire.AppendTag(nil, 2, protowire.BytesType), v)
	}
	cases := map[string][]byte{
		"batch":                     batch,
		"header":                    header,
		"empty batch":               wrap(nil),
		"batch then header":         append(append([]byte{}, batch...), header...),
		"header then batch":         append(append([]byte{}, header...), batch...),
		"batch twice":               append(append([]byte{}, batch...), batch...),
		"unknown field beside":      append(append([]byte{}, batch...), unknown...),
		"unknown field in batch":    wrap(append(append([]byte{}, batch[2:]...), unknown...)),
		"unpacked and split arrays": wrap(inner),
		"empty message":             nil,
		"truncated":                 batch[:len(batch)-3],
	}
	for name, b := range cases {
		t.Run(name, func(t *testing.T) { agreeStream(t, b) })
	}
	// 50,000 empty tracks: 100 KB on the wire, ~25 MB decoded. The batch
	// path must leave it to the expansion check, which refuses it.
	var bomb []byte
	for i := 0; i < 50_000; i++ {
		bomb = protowire.AppendBytes(protowire.AppendTag(bomb, 1, protowire.BytesType), nil)
	}
	var ve *validate.Error
	if _, err := decodeStreamRequest(wrap(bomb)); !errors.As(err, &ve) || ve.Reason != validate.ReasonTooLarge || ve.Field != "message" {
		t.Errorf("a batch of 50,000 empty tracks: %v, want message too_large", err)
	}
	for _, msgs := range badStreams(t) {
		for _, m := range msgs {
			agreeStream(t, enc(m))
		}
	}
}

// FuzzDecodeStreamRequest: decodeStreamRequest agrees with proto.Unmarshal
// on any bytes.
func FuzzDecodeStreamRequest(f *testing.F) {
	for _, m := range []proto.Message{fuzzBatch(0, 40), fuzzHeader(), fuzzBatch(0.4, 3)} {
		b, _ := proto.Marshal(m)
		f.Add(b)
	}
	f.Fuzz(func(t *testing.T, b []byte) { agreeStream(t, b) })
}

// BenchmarkDecodeStreamRequest: one 10 ms batch of six segments at
// 1000 Hz (time and quaternions), the message a live stream sends 100
// times a second: decodeStreamRequest against the general way (the
// expansion check, then proto.Unmarshal) and proto.Unmarshal alone.
func BenchmarkDecodeStreamRequest(b *testing.B) {
	batch := &kinchainv1.SampleBatch{}
	for s := kinchainv1.Segment_SEGMENT_PELVIS; s <= kinchainv1.Segment_SEGMENT_PELVIS+5; s++ {
		tr := &kinchainv1.Track{Segment: s}
		for i := 0; i < 10; i++ {
			x := float64(i) / 1000
			tr.TimeS = append(tr.TimeS, 12.3+x)
			tr.Qw, tr.Qx, tr.Qy, tr.Qz = append(tr.Qw, math.Cos(x)), append(tr.Qx, math.Sin(x)), append(tr.Qy, 0), append(tr.Qz, 0)
		}
		batch.Tracks = append(batch.Tracks, tr)
	}
	msg, err := proto.Marshal(&kinchainv1.StreamCaptureRequest{Message: &kinchainv1.StreamCaptureRequest_Batch{Batch: batch}})
	if err != nil {
		b.Fatal(err)
	}
	b.Run("decodeStreamRequest", func(b *testing.B) {
		b.ReportAllocs()
		for b.Loop() {
			if _, err := decodeStreamRequest(msg); err != nil {
				b.Fatal(err)
			}
		}
	})
	b.Run("checkExpansion+proto.Unmarshal", func(b *testing.B) {
		b.ReportAllocs()
		for b.Loop() {
			m := &kinchainv1.StreamCaptureRequest{}
			if err := checkExpansion(msg, m.ProtoReflect().Descriptor(), "message"); err != nil {
				b.Fatal(err)
			}
			if err := proto.Unmarshal(msg, m); err != nil {
				b.Fatal(err)
			}
		}
	})
	b.Run("proto.Unmarshal", func(b *testing.B) {
		b.ReportAllocs()
		for b.Loop() {
			if err := proto.Unmarshal(msg, &kinchainv1.StreamCaptureRequest{}); err != nil {
				b.Fatal(err)
			}
		}
	})
}
