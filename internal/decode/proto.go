package decode

import (
	"fmt"
	"unicode/utf8"

	"google.golang.org/protobuf/encoding/protowire"
	"google.golang.org/protobuf/proto"
	"google.golang.org/protobuf/reflect/protoreflect"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/validate"
)

// Proto decodes a capture in binary protobuf form. It enforces the default
// limits on bytes, tracks and samples before anything is allocated, by a
// first pass over the wire format that also checks every known field's wire
// type, packed lengths and UTF-8. Errors are *validate.Error naming the
// field path ("tracks[2].qw") where the bytes go wrong.
func Proto(b []byte) (*kinchainv1.Capture, error) {
	return protoCapture(b, validate.Limits{})
}

func protoCapture(b []byte, lim validate.Limits) (*kinchainv1.Capture, error) {
	lim = lim.WithDefaults()
	if len(b) > lim.MaxBytes {
		return nil, &validate.Error{Sample: -1, Reason: validate.ReasonTooLarge, Detail: fmt.Sprintf("%d bytes, more than the limit of %d", len(b), lim.MaxBytes)}
	}
	c := &kinchainv1.Capture{}
	s := wireScanner{lim: lim}
	if e := s.message(b, c.ProtoReflect().Descriptor(), "", 0); e != nil {
		return nil, e
	}
	if err := proto.Unmarshal(b, c); err != nil {
		return nil, protojsonError(err)
	}
	return c, nil
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
