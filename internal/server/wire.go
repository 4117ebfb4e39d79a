package server

import (
	"context"
	"errors"
	"fmt"

	"google.golang.org/grpc"
	"google.golang.org/grpc/encoding"
	"google.golang.org/grpc/mem"
	"google.golang.org/protobuf/encoding/protowire"
	"google.golang.org/protobuf/proto"
	"google.golang.org/protobuf/reflect/protoreflect"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/decode"
	"github.com/kinchain/kinchain/internal/validate"
)

// Decoding requests safely.
//
// gRPC's own codec unmarshals a request before any handler or interceptor
// runs, and reports a malformed message as INTERNAL. It also lets a small
// message allocate far more than its size: every empty Track in
// "capture.tracks" is two bytes on the wire and ~500 bytes in memory, so a
// 64 MiB message could ask for ~16 GiB. The server therefore installs a
// codec that hands KinematicsService requests over as raw bytes
// (rawMessage), and decodes them itself:
//
//   - AnalyzeCaptureRequest: the capture goes through decode's hardened
//     protobuf reader (limits checked on the wire before allocation; errors
//     name the field, e.g. capture.tracks[0].time_s), the rest through
//     proto.Unmarshal after the expansion check below;
//   - StreamCaptureRequest: the expansion check, then proto.Unmarshal.
//
// The expansion check (decodedBound) walks the wire bytes against the
// message descriptor and adds up an upper bound of what proto.Unmarshal
// allocates; a message whose bound exceeds maxExpansion × its size +
// expansionSlack is refused with INVALID_ARGUMENT (reason TOO_LARGE)
// before it is decoded. Decode errors are INVALID_ARGUMENT naming the
// field. DEVELOPERS.md (Service, "Memory bound of the service") derives
// the memory bound that follows.

// rawMessage is a received message left undecoded: its bytes b, held in
// buf (a buffer of gRPC's pool) until free is called. The decoders copy
// what they keep, so a message is freed as soon as it is decoded, and the
// buffer serves the next request instead of becoming garbage.
type rawMessage struct {
	b   []byte
	buf mem.Buffer
}

// free returns the buffer to the pool; b must not be used after it.
func (r *rawMessage) free() {
	if r.buf != nil {
		r.buf.Free()
	}
	*r = rawMessage{}
}

// rawCodec is the server's gRPC codec: protobuf, except that it fills a
// *rawMessage with the message's bytes.
type rawCodec struct{ encoding.CodecV2 }

func newRawCodec() rawCodec { return rawCodec{encoding.GetCodecV2("proto")} }

// Unmarshal gathers the bytes into a pooled buffer held by a *rawMessage,
// or unmarshals protobuf.
func (c rawCodec) Unmarshal(data mem.BufferSlice, v any) error {
	if r, ok := v.(*rawMessage); ok {
		if data.Len() > maxPooledBytes {
			r.b = data.Materialize()
			return nil
		}
		r.buf = data.MaterializeToBuffer(mem.DefaultBufferPool())
		r.b = r.buf.ReadOnlyData()
		return nil
	}
	return c.CodecV2.Unmarshal(data, v)
}

// Cost model of decodedBound, bytes: a message struct (kinchainv1.Track,
// the largest, is ~470 bytes with its 17 slice headers), a slice element
// decoded one at a time (append may double the capacity), a string's or
// unknown field's header.
const (
	costMessage = 512
	costElem    = 16
	costHeader  = 32
)

// maxExpansion and expansionSlack bound what a request may allocate when
// decoded: maxExpansion × wire bytes + expansionSlack (room for the ~100
// small messages of an ordinary header or options).
const (
	maxExpansion   = 4
	expansionSlack = 64 << 10
)

// decodedBound returns an upper bound of the bytes proto.Unmarshal
// allocates for b as a message md, and false when b is not valid wire
// data at the level walked (proto.Unmarshal then reports the error).
func decodedBound(b []byte, md protoreflect.MessageDescriptor, depth int) (int, bool) {
	if depth > 64 {
		return 0, false
	}
	total := 0
	fields := md.Fields()
	for len(b) > 0 {
		num, typ, n := protowire.ConsumeTag(b)
		if n < 0 {
			return 0, false
		}
		b = b[n:]
		fd := fields.ByNumber(num)
		m := protowire.ConsumeFieldValue(num, typ, b)
		if m < 0 {
			return 0, false
		}
		val := b[:m]
		b = b[m:]
		switch {
		case fd == nil:
			total += 2*(n+m) + costHeader // kept as unknown bytes
		case fd.IsMap():
			v, _ := protowire.ConsumeBytes(val)
			sub, ok := decodedBound(v, fd.Message(), depth+1)
			if !ok {
				return 0, false
			}
			total += costMessage + sub
		case fd.Kind() == protoreflect.MessageKind || fd.Kind() == protoreflect.GroupKind:
			v := val
			if typ == protowire.BytesType {
				v, _ = protowire.ConsumeBytes(val)
			}
			sub, ok := decodedBound(v, fd.Message(), depth+1)
			if !ok {
				return 0, false
			}
			total += costMessage + sub
			if fd.IsList() {
				total += costElem
			}
		case fd.Kind() == protoreflect.StringKind || fd.Kind() == protoreflect.BytesKind:
			total += m + costHeader
		case fd.IsList() && typ == protowire.BytesType: // packed scalars
			v, _ := protowire.ConsumeBytes(val)
			switch typ := fd.Kind(); typ {
			case protoreflect.DoubleKind, protoreflect.Fixed64Kind, protoreflect.Sfixed64Kind:
				total += 2 * len(v)
			case protoreflect.FloatKind, protoreflect.Fixed32Kind, protoreflect.Sfixed32Kind:
				total += 2 * len(v)
			default: // varints: up to 8 bytes per element, each ≥ 1 byte
				total += 2 * 8 * len(v)
			}
		case fd.IsList():
			total += costElem
		}
	}
	return total, true
}

// checkExpansion refuses b when decoding it as md could allocate more than
// the bound; field names the message in the error.
func checkExpansion(b []byte, md protoreflect.MessageDescriptor, field string) error {
	bound, ok := decodedBound(b, md, 0)
	if ok && bound > maxExpansion*len(b)+expansionSlack {
		return &validate.Error{Field: field, Sample: -1, Reason: validate.ReasonTooLarge,
			Detail: fmt.Sprintf("%d bytes that would decode into about %d bytes (more than %d× their size): too many small elements", len(b), bound, maxExpansion)}
	}
	return nil
}

// limitsOf returns the validation limits of an Analyzer that reports them
// (the engine does), else the defaults.
func limitsOf(a Analyzer) validate.Limits {
	if l, ok := a.(interface{ Limits() validate.Limits }); ok {
		return l.Limits().WithDefaults()
	}
	return validate.DefaultLimits()
}

// decodeAnalyzeRequest decodes an AnalyzeCaptureRequest's wire bytes. The
// capture (field 1, every occurrence merged as protobuf does) is read by
// decode's protobuf reader under lim; the rest (options, unknown fields)
// by proto.Unmarshal after the expansion check. Errors are
// *validate.Error with paths relative to the request ("request" when the
// message itself does not parse); use them with scopeBody.
func decodeAnalyzeRequest(b []byte, lim validate.Limits) (*kinchainv1.AnalyzeCaptureRequest, error) {
	req := &kinchainv1.AnalyzeCaptureRequest{}
	var capParts [][]byte
	var rest []byte
	for in := b; len(in) > 0; {
		num, typ, n := protowire.ConsumeTag(in)
		if n < 0 {
			return nil, malformedRequest(protowire.ParseError(n))
		}
		m := protowire.ConsumeFieldValue(num, typ, in[n:])
		if m < 0 {
			field := "request"
			if num == 1 {
				field = "capture"
			} else if num == 2 {
				field = "options"
			}
			return nil, &validate.Error{Field: field, Sample: -1, Reason: validate.ReasonMalformed,
				Detail: fmt.Sprintf("not valid protobuf: %v", protowire.ParseError(m))}
		}
		if num == 1 && typ == protowire.BytesType {
			v, _ := protowire.ConsumeBytes(in[n : n+m])
			capParts = append(capParts, v)
		} else {
			rest = append(rest, in[:n+m]...)
		}
		in = in[n+m:]
	}
	if len(rest) > 0 {
		if err := checkExpansion(rest, req.ProtoReflect().Descriptor(), "options"); err != nil {
			return nil, err
		}
		if err := proto.Unmarshal(rest, req); err != nil {
			return nil, &validate.Error{Field: "options", Sample: -1, Reason: validate.ReasonMalformed,
				Detail: fmt.Sprintf("not valid protobuf: %v", err)}
		}
	}
	if capParts == nil {
		return req, nil
	}
	capBytes := capParts[0]
	if len(capParts) > 1 {
		capBytes = nil
		for _, p := range capParts {
			capBytes = append(capBytes, p...)
		}
	}
	if len(capBytes) == 0 { // present and empty: a Capture without tracks
		req.Capture = &kinchainv1.Capture{}
		return req, nil
	}
	pc, err := decodeCapturePB(capBytes, lim)
	if err != nil {
		return nil, err
	}
	req.Capture = pc
	return req, nil
}

// decodeCapturePB decodes a binary Capture with decode's protobuf reader;
// error paths are made relative to a request ("capture.tracks[0].qw").
func decodeCapturePB(b []byte, lim validate.Limits) (*kinchainv1.Capture, error) {
	var f decode.Floats
	if len(b) <= maxPooledBytes {
		f = floats
	}
	pc, _, err := decode.FileWith("capture.pb", b, lim, f)
	if err != nil {
		var ve *validate.Error
		if errors.As(err, &ve) {
			e := *ve
			e.Field = scopeRequest.path(e.Field)
			return nil, &e
		}
		return nil, err
	}
	return pc, nil
}

func malformedRequest(err error) error {
	return &validate.Error{Field: "request", Sample: -1, Reason: validate.ReasonMalformed,
		Detail: fmt.Sprintf("not valid protobuf: %v", err)}
}

// decodeStreamRequest decodes one StreamCaptureRequest. Errors are
// *validate.Error naming "message". A message that is a batch and nothing
// else (what a client sends 100 times a second per stream) is decoded by
// decodeBatch, in 4.4 µs for a 10 ms six-segment batch against 6.0–6.5 µs
// for the expansion check and proto.Unmarshal (BenchmarkDecodeStreamRequest);
// anything else takes the expansion check, then proto.Unmarshal. Both give
// the same message (TestDecodeStreamRequest, FuzzDecodeStreamRequest).
func decodeStreamRequest(b []byte) (*kinchainv1.StreamCaptureRequest, error) {
	m := &kinchainv1.StreamCaptureRequest{}
	if batch, ok := decodeBatch(b); ok {
		m.Message = &kinchainv1.StreamCaptureRequest_Batch{Batch: batch}
		return m, nil
	}
	if err := checkExpansion(b, m.ProtoReflect().Descriptor(), "message"); err != nil {
		return nil, err
	}
	if err := proto.Unmarshal(b, m); err != nil {
		return nil, &validate.Error{Field: "message", Sample: -1, Reason: validate.ReasonMalformed,
			Detail: fmt.Sprintf("not a valid StreamCaptureRequest: %v", err)}
	}
	return m, nil
}

// Field numbers of StreamCaptureRequest.batch and SampleBatch.tracks.
const (
	streamBatchField = 2
	batchTracksField = 1
)

// decodeBatch decodes b when it is one StreamCaptureRequest.batch field
// and nothing else, whose SampleBatch holds only tracks, with
// decode.UnmarshalTrack; false means "take the general way". It needs no
// expansion check of its own: sample arrays decode at most 1:1 (packed)
// or 8:9 (unpacked, plus slice growth), the rest of a track goes through
// proto.Unmarshal at no more than the expansion check allows, and the one
// message that is small on the wire and large in memory, a track, is
// counted: a batch with more tracks than the check would allow for its
// size goes the general way, where the check refuses it. The arrays are
// allocated, not taken from the pool: for arrays of ten samples the pool
// costs more than it saves.
func decodeBatch(b []byte) (*kinchainv1.SampleBatch, bool) {
	num, typ, n := protowire.ConsumeTag(b)
	if n < 0 || num != streamBatchField || typ != protowire.BytesType {
		return nil, false
	}
	v, m := protowire.ConsumeBytes(b[n:])
	if m < 0 || n+m != len(b) {
		return nil, false
	}
	batch := &kinchainv1.SampleBatch{}
	for len(v) > 0 {
		num, typ, n := protowire.ConsumeTag(v)
		if n < 0 || num != batchTracksField || typ != protowire.BytesType {
			return nil, false
		}
		tb, m := protowire.ConsumeBytes(v[n:])
		if m < 0 {
			return nil, false
		}
		if (len(batch.Tracks)+1)*costMessage > maxExpansion*len(b)+expansionSlack {
			return nil, false
		}
		t, err := decode.UnmarshalTrack(tb, nil)
		if err != nil {
			return nil, false
		}
		batch.Tracks = append(batch.Tracks, t)
		v = v[n+m:]
	}
	return batch, true
}

// serviceDesc is the generated KinematicsService description with
// AnalyzeCapture's handler replaced by one that receives the raw request
// and decodes it with decodeAnalyzeRequest inside the interceptor chain, so
// a bad message is logged, counted and answered INVALID_ARGUMENT like any
// other bad request.
func (s *Server) serviceDesc() *grpc.ServiceDesc {
	d := kinchainv1.KinematicsService_ServiceDesc
	d.Methods = append([]grpc.MethodDesc(nil), d.Methods...)
	for i := range d.Methods {
		if d.Methods[i].MethodName == "AnalyzeCapture" {
			d.Methods[i].Handler = s.analyzeHandler
		}
	}
	return &d
}

func (s *Server) analyzeHandler(srv any, ctx context.Context, dec func(any) error, interceptor grpc.UnaryServerInterceptor) (any, error) {
	var raw rawMessage
	if err := dec(&raw); err != nil {
		raw.free()
		return nil, err
	}
	req, derr := decodeAnalyzeRequest(raw.b, s.lim)
	raw.free()
	if req == nil {
		req = &kinchainv1.AnalyzeCaptureRequest{}
	}
	// The analysis has returned when the chain has: its arrays can serve
	// the next request (pool.go).
	defer releaseRequest(req)
	handler := func(ctx context.Context, r any) (any, error) {
		if derr != nil {
			return nil, s.toStatus(ctx, derr, scopeBody)
		}
		return srv.(kinchainv1.KinematicsServiceServer).AnalyzeCapture(ctx, r.(*kinchainv1.AnalyzeCaptureRequest))
	}
	if interceptor == nil {
		return handler(ctx, req)
	}
	info := &grpc.UnaryServerInfo{Server: srv, FullMethod: kinchainv1.KinematicsService_AnalyzeCapture_FullMethodName}
	return interceptor(ctx, req, info, handler)
}
