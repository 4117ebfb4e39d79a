package stream

import (
	"encoding/json"
	"errors"
	"os"
	"path/filepath"
	"testing"

	"google.golang.org/protobuf/encoding/protojson"
	"google.golang.org/protobuf/proto"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/validate"
)

// FuzzPush feeds arbitrary wire bytes, read as batches, to a session that
// has already taken good samples: Push must refuse or take them, never
// panic, and a refusal must be a *validate.Error. Seeds: the batches of
// the bad-stream corpus.
func FuzzPush(f *testing.F) {
	files, _ := filepath.Glob(filepath.Join("..", "..", "testdata", "bad-stream", "*.json"))
	for _, fn := range files {
		data, err := os.ReadFile(fn)
		if err != nil {
			f.Fatal(err)
		}
		var c struct{ Messages []json.RawMessage }
		if err := json.Unmarshal(data, &c); err != nil {
			f.Fatal(err)
		}
		for _, m := range c.Messages {
			var r kinchainv1.StreamCaptureRequest
			if protojson.Unmarshal(m, &r) == nil && r.GetBatch() != nil {
				if b, err := proto.Marshal(r.GetBatch()); err == nil {
					f.Add(b)
				}
			}
		}
	}
	f.Fuzz(func(t *testing.T, wire []byte) {
		var b kinchainv1.SampleBatch
		if proto.Unmarshal(wire, &b) != nil {
			return
		}
		h := header(kinchainv1.Segment_SEGMENT_PELVIS, kinchainv1.Segment_SEGMENT_CLUB)
		h.RateHz = 100
		s, err := NewSession(h, Limits{})
		if err != nil {
			t.Fatal(err)
		}
		if _, err := s.Push(stillBatch(-1, 20, kinchainv1.Segment_SEGMENT_PELVIS, kinchainv1.Segment_SEGMENT_CLUB)); err != nil {
			t.Fatal(err)
		}
		if _, err := s.Push(&b); err != nil {
			var ve *validate.Error
			if !errors.As(err, &ve) || ve.Field == "" {
				t.Fatalf("refusal %v is not a *validate.Error naming a field", err)
			}
		}
		if out := s.Close(); out[len(out)-1].GetSummary() == nil {
			t.Fatal("no summary")
		}
	})
}
