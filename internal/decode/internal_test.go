package decode

import (
	"testing"

	"google.golang.org/protobuf/encoding/protowire"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/validate"
)

// The wire scanner is generic; Capture has no packed varints and no deep
// nesting, so these paths are checked on other kinchain messages.

func TestScannerPackedVarints(t *testing.T) {
	md := (&kinchainv1.StreamHeader{}).ProtoReflect().Descriptor()
	s := wireScanner{lim: validate.DefaultLimits()}
	// segments (field 4, repeated enum), packed: 1, 2, 300.
	v := protowire.AppendVarint(protowire.AppendVarint(protowire.AppendVarint(nil, 1), 2), 300)
	good := protowire.AppendBytes(protowire.AppendTag(nil, 4, protowire.BytesType), v)
	if e := s.message(good, md, "", 0); e != nil {
		t.Fatalf("valid packed varints: %v", e)
	}
	bad := protowire.AppendBytes(protowire.AppendTag(nil, 4, protowire.BytesType), append(v, 0x80))
	e := s.message(bad, md, "", 0)
	if e == nil || e.Field != "segments" || e.Sample != 3 || e.Reason != validate.ReasonMalformed {
		t.Fatalf("bad packed varint: %v", e)
	}
}

func TestScannerDepth(t *testing.T) {
	md := (&kinchainv1.Capture{}).ProtoReflect().Descriptor()
	s := wireScanner{lim: validate.DefaultLimits()}
	if e := s.message(nil, md, "x", maxDepth+1); e == nil || e.Reason != validate.ReasonMalformed {
		t.Fatalf("got %v", e)
	}
}

func TestMaxSegment(t *testing.T) {
	max := 0
	for n := range kinchainv1.Segment_name {
		max = int(max32(int32(max), n))
	}
	if max != maxSegment || len(segmentsByName) != maxSegment {
		t.Fatalf("maxSegment %d, enum max %d, names %d", maxSegment, max, len(segmentsByName))
	}
}

func max32(a, b int32) int32 {
	if a > b {
		return a
	}
	return b
}
