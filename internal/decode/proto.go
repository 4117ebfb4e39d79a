package decode

import (
	"encoding/binary"
	"fmt"
	"math"
	"slices"
	"unicode/utf8"

	"google.golang.org/protobuf/encoding/protowire"
	"google.golang.org/protobuf/proto"
	"google.golang.org/protobuf/reflect/protoreflect"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/capture"
	"github.com/kinchain/kinchain/internal/validate"
)

// Proto decodes a capture in binary protobuf form. It enforces the default
// limits on bytes, tracks and samples before anything is allocated, by a
// first pass over the wire format that also checks every known field's wire
// type, packed lengths and UTF-8. Errors are *validate.Error naming the
// field path ("tracks[2].qw") where the bytes go wrong.
func Proto(b []byte) (*kinchainv1.Capture, error) {
	return protoCapture(b, validate.Limits{}, nil)
}

// Floats supplies the sample arrays of a decoded protobuf capture, so that
// a server can recycle them: Get returns a slice of length n, whose
// contents the decoder overwrites.
type Floats interface {
	Get(n int) []float64
}

func protoCapture(b []byte, lim validate.Limits, f Floats) (*kinchainv1.Capture, error) {
	lim = lim.WithDefaults()
	if len(b) > lim.MaxBytes {
		return nil, &validate.Error{Sample: -1, Reason: validate.ReasonTooLarge, Detail: fmt.Sprintf("%d bytes, more than the limit of %d", len(b), lim.MaxBytes)}
	}
	c := &kinchainv1.Capture{}
	s := wireScanner{lim: lim}
	if e := s.message(b, c.ProtoReflect().Descriptor(), "", 0); e != nil {
		return nil, e
	}
	if err := unmarshalCapture(b, c, f); err != nil {
		return nil, protojsonError(err)
	}
	return c, nil
}

// unmarshalCapture is proto.Unmarshal(b, c) for wire data that passed the
// scan, except that the tracks' sample arrays are copied out of their
// packed bytes here, into slices from f. Decoding them is mostly
// allocating and zeroing fresh memory, so a server that recycles the
// arrays saves most of it (DEVELOPERS.md, Performance, "Service").
// Everything else (the capture's other fields, a track's segment and
// mounting, unknown fields) still goes through proto.Unmarshal.
// TestProtoMatchesUnmarshal and FuzzProto check the result equals
// proto.Unmarshal's.
func unmarshalCapture(b []byte, c *kinchainv1.Capture, f Floats) error {
	var rest []byte
	var tracks []*kinchainv1.Track
	for in := b; len(in) > 0; {
		num, typ, n := protowire.ConsumeTag(in)
		if n < 0 {
			return proto.Unmarshal(b, c) // not after the scan; proto says why
		}
		m := protowire.ConsumeFieldValue(num, typ, in[n:])
		if m < 0 {
			return proto.Unmarshal(b, c)
		}
		if num == captureTracksNumber && typ == protowire.BytesType {
			v, _ := protowire.ConsumeBytes(in[n : n+m])
			t, err := unmarshalTrack(v, f)
			if err != nil {
				return err
			}
			tracks = append(tracks, t)
		} else {
			rest = append(rest, in[:n+m]...)
		}
		in = in[n+m:]
	}
	if err := proto.Unmarshal(rest, c); err != nil {
		return err
	}
	c.Tracks = tracks
	return nil
}

// UnmarshalTrack is proto.Unmarshal of one Track's wire bytes b, with
// the sample arrays taken from f (nil: allocated): the server decodes the
// tracks of stream batches with it. Unlike Proto it applies no limits and
// no first pass; the caller bounds the message.
func UnmarshalTrack(b []byte, f Floats) (*kinchainv1.Track, error) { return unmarshalTrack(b, f) }

// unmarshalTrack decodes one Track: its repeated doubles (packed or not;
// repeated occurrences appended in order, as protobuf merges them) here,
// the other fields with proto.Unmarshal.
func unmarshalTrack(b []byte, f Floats) (*kinchainv1.Track, error) {
	t := &kinchainv1.Track{}
	var arrays [capture.NumArrays][]float64 // indexed as capture.TrackArrays
	var rest []byte
	for in := b; len(in) > 0; {
		num, typ, n := protowire.ConsumeTag(in)
		if n < 0 {
			return t, proto.Unmarshal(b, t)
		}
		m := protowire.ConsumeFieldValue(num, typ, in[n:])
		if m < 0 {
			return t, proto.Unmarshal(b, t)
		}
		k := int(num) - firstTrackArray
		switch {
		case num == trackSegmentNumber && typ == protowire.VarintType:
			// An enum is an int32 on the wire (protobuf.dev encoding
			// guide): the low 32 bits of the varint; the last one wins.
			v, _ := protowire.ConsumeVarint(in[n : n+m])
			t.Segment = kinchainv1.Segment(int32(v))
		case k < 0 || k >= capture.NumArrays:
			rest = append(rest, in[:n+m]...)
		case typ == protowire.BytesType:
			v, _ := protowire.ConsumeBytes(in[n : n+m])
			if len(v)%8 != 0 {
				return t, proto.Unmarshal(b, t)
			}
			arrays[k] = appendDoubles(arrays[k], v, f)
		case typ == protowire.Fixed64Type:
			w, _ := protowire.ConsumeFixed64(in[n : n+m])
			arrays[k] = append(arrays[k], math.Float64frombits(w))
		default:
			return t, proto.Unmarshal(b, t)
		}
		in = in[n+m:]
	}
	if len(rest) > 0 {
		seg := t.Segment
		if err := proto.Unmarshal(rest, t); err != nil {
			return t, err
		}
		t.Segment = seg // rest holds no segment field
	}
	capture.SetTrackArrays(t, &arrays) // rest held none of them
	return t, nil
}

// appendDoubles appends the little-endian doubles of packed bytes v to
// dst; a first occurrence gets its slice from f.
func appendDoubles(dst []float64, v []byte, f Floats) []float64 {
	n := len(v) / 8
	k := len(dst)
	switch {
	case dst == nil && f != nil:
		dst = f.Get(n)
	case dst == nil:
		dst = make([]float64, n)
	default:
		dst = slices.Grow(dst, n)[:k+n]
	}
	out := dst[k:]
	for i := range out {
		out[i] = math.Float64frombits(binary.LittleEndian.Uint64(v[8*i:]))
	}
	return dst
}

// Track's segment is field 1 and its repeated double fields are numbers 2
// (time_s) to 18 (pz), in the order of capture.TrackArrays, and
// Capture.tracks is number 4; init checks them against the descriptors.
const (
	trackSegmentNumber  = 1
	firstTrackArray     = 2
	captureTracksNumber = 4
)

func init() {
	fields := (&kinchainv1.Track{}).ProtoReflect().Descriptor().Fields()
	for k, name := range capture.ArrayNames {
		fd := fields.ByNumber(protowire.Number(firstTrackArray + k))
		if fd == nil || string(fd.Name()) != name || fd.Kind() != protoreflect.DoubleKind || !fd.IsList() {
			panic(fmt.Sprintf("decode: Track field %d is not the repeated double %s", firstTrackArray+k, name))
		}
	}
	if fd := fields.ByNumber(trackSegmentNumber); fd == nil || fd.Kind() != protoreflect.EnumKind || fd.IsList() {
		panic("decode: Track field 1 is not the segment enum")
	}
	if fd := (&kinchainv1.Capture{}).ProtoReflect().Descriptor().Fields().ByNumber(captureTracksNumber); fd == nil || fd.FullName() != fieldTracks {
		panic("decode: Capture.tracks is not field 4")
	}
}

// wireScanner walks protobuf wire data against a message descriptor.
type wireScanner struct {
	lim             validate.Limits
	tracks, samples int
}

// maxDepth bounds the nesting of known message fields.
const maxDepth = 32

func wireErr(field string, sample int, r validate.Reason, format string, a ...any) *validate.Error {
	return &validate.Error{Field: field, Sample: sample, Reason: r, Detail: fmt.Sprintf(format, a...)}
}

var wireTypeNames = map[protowire.Type]string{
	protowire.VarintType:     "varint",
	protowire.Fixed32Type:    "fixed32",
	protowire.Fixed64Type:    "fixed64",
	protowire.BytesType:      "length-delimited",
	protowire.StartGroupType: "start-group",
	protowire.EndGroupType:   "end-group",
}

func wireTypeName(t protowire.Type) string {
	if n, ok := wireTypeNames[t]; ok {
		return n
	}
	return fmt.Sprintf("wire type %d", t)
}

// consumeBytes reads a length-delimited value, explaining a bad length.
func consumeBytes(b []byte, fp string) ([]byte, int, *validate.Error) {
	v, n := protowire.ConsumeBytes(b)
	if n >= 0 {
		return v, n, nil
	}
	if l, m := protowire.ConsumeVarint(b); m > 0 {
		return nil, 0, wireErr(fp, -1, validate.ReasonMalformed, "length %d runs past the end of the data (%d bytes left)", l, len(b)-m)
	}
	return nil, 0, wireErr(fp, -1, validate.ReasonMalformed, "bad length: %v", protowire.ParseError(n))
}

func (s *wireScanner) message(b []byte, md protoreflect.MessageDescriptor, path string, depth int) *validate.Error {
	if depth > maxDepth {
		return wireErr(path, -1, validate.ReasonMalformed, "nested too deeply")
	}
	var index map[protoreflect.FieldNumber]int
	for len(b) > 0 {
		num, typ, n := protowire.ConsumeTag(b)
		if n < 0 {
			return wireErr(path, -1, validate.ReasonMalformed, "bad field tag: %v", protowire.ParseError(n))
		}
		b = b[n:]
		fd := md.Fields().ByNumber(num)
		if fd == nil {
			m := protowire.ConsumeFieldValue(num, typ, b)
			if m < 0 {
				return wireErr(join(path, fmt.Sprint(num)), -1, validate.ReasonMalformed, "unknown field %d: %v", num, protowire.ParseError(m))
			}
			b = b[m:]
			continue
		}
		fp := join(path, string(fd.Name()))
		if index == nil {
			index = map[protoreflect.FieldNumber]int{}
		}
		i := index[num]
		wrongType := func(want protowire.Type) *validate.Error {
			return wireErr(fp, -1, validate.ReasonMalformed, "%s data where %s is expected", wireTypeName(typ), wireTypeName(want))
		}
		count := 0
		switch k := fd.Kind(); {
		case fd.IsMap() || k == protoreflect.MessageKind:
			if typ != protowire.BytesType {
				return wrongType(protowire.BytesType)
			}
			v, m, e := consumeBytes(b, fp)
			if e != nil {
				return e
			}
			b = b[m:]
			elem := fp
			if fd.IsList() {
				elem = fmt.Sprintf("%s[%d]", fp, i)
			}
			if fd.FullName() == fieldTracks {
				if s.tracks++; s.tracks > s.lim.MaxTracks {
					return wireErr(fp, -1, validate.ReasonTooLarge, "more than the limit of %d tracks", s.lim.MaxTracks)
				}
			}
			if e := s.message(v, fd.Message(), elem, depth+1); e != nil {
				return e
			}
			count = 1
		case k == protoreflect.StringKind || k == protoreflect.BytesKind:
			if typ != protowire.BytesType {
				return wrongType(protowire.BytesType)
			}
			v, m, e := consumeBytes(b, fp)
			if e != nil {
				return e
			}
			b = b[m:]
			if k == protoreflect.StringKind && !utf8.Valid(v) {
				return wireErr(fp, -1, validate.ReasonMalformed, "not valid UTF-8")
			}
			count = 1
		default:
			want, size := scalarWire(k)
			switch {
			case typ == want:
				m := protowire.ConsumeFieldValue(num, typ, b)
				if m < 0 {
					return wireErr(fp, sampleOf(fd, i), validate.ReasonMalformed, "truncated value: %v", protowire.ParseError(m))
				}
				b = b[m:]
				count = 1
			case typ == protowire.BytesType && fd.IsList():
				v, m, e := consumeBytes(b, fp)
				if e != nil {
					return e
				}
				b = b[m:]
				if size > 0 {
					if len(v)%size != 0 {
						return wireErr(fp, -1, validate.ReasonMalformed, "packed length %d is not a multiple of %d", len(v), size)
					}
					count = len(v) / size
				} else {
					for len(v) > 0 {
						_, m := protowire.ConsumeVarint(v)
						if m < 0 {
							return wireErr(fp, i+count, validate.ReasonMalformed, "bad packed varint: %v", protowire.ParseError(m))
						}
						v = v[m:]
						count++
					}
				}
			default:
				return wrongType(want)
			}
		}
		index[num] = i + count
		if fd.FullName() == fieldTime {
			if s.samples += count; s.samples > s.lim.MaxSamples {
				return wireErr(fp, -1, validate.ReasonTooLarge, "more than the limit of %d samples", s.lim.MaxSamples)
			}
		}
	}
	return nil
}

func sampleOf(fd protoreflect.FieldDescriptor, i int) int {
	if fd.IsList() {
		return i
	}
	return -1
}

// scalarWire returns the wire type of a scalar kind and its fixed size in
// bytes (0 for varints).
func scalarWire(k protoreflect.Kind) (protowire.Type, int) {
	switch k {
	case protoreflect.DoubleKind, protoreflect.Fixed64Kind, protoreflect.Sfixed64Kind:
		return protowire.Fixed64Type, 8
	case protoreflect.FloatKind, protoreflect.Fixed32Kind, protoreflect.Sfixed32Kind:
		return protowire.Fixed32Type, 4
	}
	return protowire.VarintType, 0
}
