package decode_test

import (
	"errors"
	"math"
	"testing"

	"google.golang.org/protobuf/encoding/protowire"
	"google.golang.org/protobuf/proto"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/decode"
	"github.com/kinchain/kinchain/internal/validate"
)

// Wire-format builders, written from the protobuf encoding spec
// (protobuf.dev/programming-guides/encoding) with protowire.
func tag(b []byte, n protowire.Number, t protowire.Type) []byte { return protowire.AppendTag(b, n, t) }

func packed(n protowire.Number, vs ...float64) []byte {
	var v []byte
	for _, x := range vs {
		v = protowire.AppendFixed64(v, math.Float64bits(x))
	}
	return protowire.AppendBytes(tag(nil, n, protowire.BytesType), v)
}

func msg(n protowire.Number, parts ...[]byte) []byte {
	var v []byte
	for _, p := range parts {
		v = append(v, p...)
	}
	return protowire.AppendBytes(tag(nil, n, protowire.BytesType), v)
}

func cat(parts ...[]byte) []byte {
	var v []byte
	for _, p := range parts {
		v = append(v, p...)
	}
	return v
}

func TestProtoDecode(t *testing.T) {
	// A hand-assembled capture: time_s packed, qw..qz unpacked (both are
	// valid encodings of a repeated double), an unknown field 99 to skip.
	seg := protowire.AppendVarint(tag(nil, 1, protowire.VarintType), 2)
	unpacked := func(n protowire.Number, vs ...float64) []byte {
		var b []byte
		for _, x := range vs {
			b = protowire.AppendFixed64(tag(b, n, protowire.Fixed64Type), math.Float64bits(x))
		}
		return b
	}
	b := cat(
		protowire.AppendString(tag(nil, 1, protowire.BytesType), "p1"),
		msg(4, seg, packed(2, 0, 0.5), unpacked(3, 1, 0.6), unpacked(4, 0, 0), unpacked(5, 0, 0), unpacked(6, 0, 0.8)),
		protowire.AppendVarint(tag(nil, 99, protowire.VarintType), 7),
		protowire.AppendFixed64(tag(nil, 6, protowire.Fixed64Type), math.Float64bits(45)),
	)
	got, err := decode.Proto(b)
	if err != nil {
		t.Fatal(err)
	}
	want := &kinchainv1.Capture{
		CaptureId:        "p1",
		TargetHeadingDeg: f64(45),
		Tracks: []*kinchainv1.Track{{
			Segment: kinchainv1.Segment_SEGMENT_THORAX,
			TimeS:   []float64{0, 0.5}, Qw: []float64{1, 0.6}, Qx: []float64{0, 0}, Qy: []float64{0, 0}, Qz: []float64{0, 0.8},
		}},
	}
	// The unknown field is kept by proto.Unmarshal; compare without it.
	got.ProtoReflect().SetUnknown(nil)
	if !proto.Equal(got, want) {
		t.Errorf("differs:\n%s", diff(want, got))
	}
}

func TestProtoErrors(t *testing.T) {
	seg := protowire.AppendVarint(tag(nil, 1, protowire.VarintType), 1)
	cases := []struct {
		name   string
		b      []byte
		lim    validate.Limits
		field  string
		sample int
		reason validate.Reason
	}{
		{"bad tag", []byte{0xff, 0xff, 0xff, 0xff, 0xff, 0xff, 0xff, 0xff, 0xff, 0xff, 0xff}, validate.Limits{}, "", -1, validate.ReasonMalformed},
		{"field number 0", []byte{0x00}, validate.Limits{}, "", -1, validate.ReasonMalformed},
		{"unknown field truncated", cat(tag(nil, 50, protowire.Fixed64Type), []byte{1, 2}), validate.Limits{}, "50", -1, validate.ReasonMalformed},
		{"tracks as varint", protowire.AppendVarint(tag(nil, 4, protowire.VarintType), 1), validate.Limits{}, "tracks", -1, validate.ReasonMalformed},
		{"tracks length lies", cat(tag(nil, 4, protowire.BytesType), protowire.AppendVarint(nil, 1<<30), seg), validate.Limits{}, "tracks", -1, validate.ReasonMalformed},
		{"time_s length lies", msg(4, seg, cat(tag(nil, 2, protowire.BytesType), protowire.AppendVarint(nil, 800), make([]byte, 16))), validate.Limits{}, "tracks[0].time_s", -1, validate.ReasonMalformed},
		{"packed length not a multiple of 8", msg(4, seg, cat(tag(nil, 3, protowire.BytesType), []byte{12}, make([]byte, 12))), validate.Limits{}, "tracks[0].qw", -1, validate.ReasonMalformed},
		{"unpacked double truncated", msg(4, seg, packed(2, 0), cat(tag(nil, 2, protowire.Fixed64Type), []byte{1, 2, 3})), validate.Limits{}, "tracks[0].time_s", 1, validate.ReasonMalformed},
		{"time_s as varint", msg(4, seg, protowire.AppendVarint(tag(nil, 2, protowire.VarintType), 3)), validate.Limits{}, "tracks[0].time_s", -1, validate.ReasonMalformed},
		{"segment as fixed64", msg(4, protowire.AppendFixed64(tag(nil, 1, protowire.Fixed64Type), 1)), validate.Limits{}, "tracks[0].segment", -1, validate.ReasonMalformed},
		{"capture_id as varint", protowire.AppendVarint(tag(nil, 1, protowire.VarintType), 1), validate.Limits{}, "capture_id", -1, validate.ReasonMalformed},
		{"capture_id not UTF-8", protowire.AppendString(tag(nil, 1, protowire.BytesType), "\xff\xfe"), validate.Limits{}, "capture_id", -1, validate.ReasonMalformed},
		{"club truncated", cat(tag(nil, 3, protowire.BytesType), []byte{5, 'a'}), validate.Limits{}, "club", -1, validate.ReasonMalformed},
		{"length varint overflow", cat(tag(nil, 3, protowire.BytesType), []byte{0xff, 0xff, 0xff, 0xff, 0xff, 0xff, 0xff, 0xff, 0xff, 0xff, 0xff}), validate.Limits{}, "club", -1, validate.ReasonMalformed},
		{"metadata value not UTF-8", msg(7, protowire.AppendString(tag(nil, 1, protowire.BytesType), "k"), protowire.AppendString(tag(nil, 2, protowire.BytesType), "\xc3")), validate.Limits{}, "metadata.value", -1, validate.ReasonMalformed},
		{"mounting w as varint", msg(4, seg, msg(19, protowire.AppendVarint(tag(nil, 1, protowire.VarintType), 1))), validate.Limits{}, "tracks[0].mounting.w", -1, validate.ReasonMalformed},
		{"too many tracks", cat(msg(4), msg(4), msg(4)), validate.Limits{MaxTracks: 2}, "tracks", -1, validate.ReasonTooLarge},
		{"too many samples", cat(msg(4, packed(2, 0, 1, 2)), msg(4, packed(2, 0, 1, 2))), validate.Limits{MaxSamples: 5}, "tracks[1].time_s", -1, validate.ReasonTooLarge},
		{"too many bytes", make([]byte, 101), validate.Limits{MaxBytes: 100}, "", -1, validate.ReasonTooLarge},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			c, _, err := decode.File("x.pb", tc.b, tc.lim)
			var e *validate.Error
			if !errors.As(err, &e) {
				t.Fatalf("got %v (%v), want a *validate.Error", err, c)
			}
			if e.Field != tc.field || e.Sample != tc.sample || e.Reason != tc.reason || e.Line != 0 {
				t.Errorf("got field %q sample %d reason %s line %d (%v); want %q %d %s", e.Field, e.Sample, e.Reason, e.Line, err, tc.field, tc.sample, tc.reason)
			}
			if e.Detail == "" {
				t.Error("no detail")
			}
			// Proto (default limits) agrees wherever the limits do not matter.
			if tc.lim == (validate.Limits{}) {
				if _, err2 := decode.Proto(tc.b); err2 == nil || err2.Error() != err.Error() {
					t.Errorf("Proto: %v, File: %v", err2, err)
				}
			}
		})
	}
}

// TestProtoTrackBomb: 2-byte empty tracks cannot make the decoder allocate
// millions of messages.
func TestProtoTrackBomb(t *testing.T) {
	var b []byte
	for range 100000 {
		b = append(b, msg(4)...)
	}
	_, err := decode.Proto(b)
	var e *validate.Error
	if !errors.As(err, &e) || e.Reason != validate.ReasonTooLarge || e.Field != "tracks" {
		t.Fatalf("got %v", err)
	}
}

// poisoned is a decode.Floats whose slices start out NaN, with spare
// capacity, as recycled slices would.
type poisoned struct{ gets int }

func (p *poisoned) Get(n int) []float64 {
	p.gets++
	s := make([]float64, n, n+3)
	for i := range s[:cap(s)] {
		s[:cap(s)][i] = math.NaN()
	}
	return s
}

// TestProtoMatchesUnmarshal: decode.Proto copies the tracks' sample arrays
// out of the wire bytes itself; the reference is proto.Unmarshal
// (google.golang.org/protobuf), which must give an equal message on wire
// data that exercises protobuf's merge rules (protobuf.dev, encoding
// guide, "Packed Repeated Fields" and "Last One Wins"): a packed array split
// over two occurrences, packed and unpacked elements of one field
// interleaved, tracks among other capture fields, a scalar set twice,
// unknown fields inside a track, an empty packed array. Decoding into
// recycled slices (decode.FileWith) must give the same.
func TestProtoMatchesUnmarshal(t *testing.T) {
	seg := func(s int) []byte { return protowire.AppendVarint(tag(nil, 1, protowire.VarintType), uint64(s)) }
	one := func(n protowire.Number, x float64) []byte {
		return protowire.AppendFixed64(tag(nil, n, protowire.Fixed64Type), math.Float64bits(x))
	}
	mounting := msg(19, one(1, 0.5), one(2, 0.5))
	unknown := protowire.AppendVarint(tag(nil, 77, protowire.VarintType), 5)
	cases := map[string][]byte{
		"split packed": msg(4, seg(1), packed(2, 0, 0.01), packed(3, 1, 1), packed(2, 0.02), packed(3, 1)),
		"packed and unpacked interleaved": msg(4, seg(2), one(3, 1), packed(3, 0.5, 0.25), one(3, -0.125),
			packed(2, 0, 1, 2, 3)),
		"tracks among other fields": cat(
			protowire.AppendString(tag(nil, 1, protowire.BytesType), "a"),
			msg(4, seg(1), packed(2, 0, 1), packed(3, 1, 1), packed(4, 0, 0), packed(5, 0, 0), packed(6, 0, 0)),
			protowire.AppendVarint(tag(nil, 2, protowire.VarintType), 1),
			msg(4, seg(5), packed(2, 0, 1), packed(7, 0.1, 0.2), packed(10, 9.8, 9.7), mounting),
			protowire.AppendString(tag(nil, 1, protowire.BytesType), "b"), // last one wins
			msg(4, seg(6), unknown, packed(16, 1), packed(17), packed(18, math.Copysign(0, -1)), unknown),
		),
		"segment set twice": msg(4, seg(1), packed(2, 0, 1), seg(3), packed(2, 2)),
		// An enum is an int32: the low 32 bits of the varint count.
		"segment past int32":      msg(4, seg(1<<40+3), packed(2, 0, 1)),
		"negative segment":        msg(4, protowire.AppendVarint(tag(nil, 1, protowire.VarintType), uint64(1<<64-1)), packed(2, 0)),
		"segment with a mounting": msg(4, mounting, seg(6), packed(2, 0)),
		"empty track":             msg(4),
		"every array": msg(4, seg(4), packed(2, 1), packed(3, 2), packed(4, 3), packed(5, 4), packed(6, 5), packed(7, 6),
			packed(8, 7), packed(9, 8), packed(10, 9), packed(11, 10), packed(12, 11), packed(13, 12), packed(14, 13),
			packed(15, 14), packed(16, 15), packed(17, 16), packed(18, math.Inf(1))),
	}
	for name, b := range cases {
		t.Run(name, func(t *testing.T) {
			want := &kinchainv1.Capture{}
			if err := proto.Unmarshal(b, want); err != nil {
				t.Fatal(err)
			}
			got, err := decode.Proto(b)
			if err != nil {
				t.Fatal(err)
			}
			if !proto.Equal(got, want) {
				t.Errorf("decode.Proto differs from proto.Unmarshal:\n%s", diff(want, got))
			}
			var p poisoned
			got, _, err = decode.FileWith("x.pb", b, validate.Limits{}, &p)
			if err != nil {
				t.Fatal(err)
			}
			if !proto.Equal(got, want) {
				t.Errorf("decode.FileWith differs from proto.Unmarshal:\n%s", diff(want, got))
			}
		})
	}
}
