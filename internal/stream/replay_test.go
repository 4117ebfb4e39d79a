package stream

import (
	"math"
	"slices"
	"testing"

	"google.golang.org/protobuf/proto"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/capture"
	"github.com/kinchain/kinchain/internal/synth"
)

// TestSplitReassembles: the batches of Split, put back together, are the
// capture's tracks, each batch within its span.
func TestSplitReassembles(t *testing.T) {
	capt, _, err := synth.Generate(synth.Config{JitterMs: 0.2, Dropouts: 3, IMU: true, Seed: 3,
		SegmentRates: map[kinchainv1.Segment]float64{kinchainv1.Segment_SEGMENT_HEAD: 100}})
	if err != nil {
		t.Fatal(err)
	}
	for _, span := range []float64{0.001, 0.013, 0.5, 100} {
		got := map[kinchainv1.Segment]*kinchainv1.Track{}
		t0 := math.Inf(1)
		for _, tr := range capt.Tracks {
			t0 = math.Min(t0, tr.TimeS[0])
		}
		k := 0
		err := Split(capt, span, func(b *kinchainv1.SampleBatch, end float64) error {
			for _, tr := range b.Tracks {
				lo, hi := tr.TimeS[0], tr.TimeS[len(tr.TimeS)-1]
				if hi >= end || lo < end-span-1e-9 {
					t.Fatalf("span %g: batch ending %g holds %g..%g", span, end, lo, hi)
				}
				g := got[tr.Segment]
				if g == nil {
					g = &kinchainv1.Track{Segment: tr.Segment}
					got[tr.Segment] = g
				}
				a, ga := capture.TrackArrays(tr), capture.TrackArrays(g)
				for j := range a {
					ga[j] = append(ga[j], a[j]...)
				}
				capture.SetTrackArrays(g, &ga)
			}
			k++
			return nil
		})
		if err != nil {
			t.Fatal(err)
		}
		for _, tr := range capt.Tracks {
			want := proto.Clone(tr).(*kinchainv1.Track)
			want.Mounting = nil
			if !proto.Equal(got[tr.Segment], want) {
				t.Errorf("span %g: %v reassembled differently", span, tr.Segment)
			}
		}
		if span == 100 && k != 1 {
			t.Errorf("one span over the whole capture gave %d batches", k)
		}
	}
	if err := Split(capt, 0, func(*kinchainv1.SampleBatch, float64) error { return nil }); err == nil {
		t.Error("a zero span was accepted")
	}
	if err := Split(capt, 1e-12, func(*kinchainv1.SampleBatch, float64) error { return nil }); err == nil {
		t.Error("a span making 10^12 batches was accepted")
	}
}

// TestHeaderFor: the header announces what the capture holds.
func TestHeaderFor(t *testing.T) {
	capt, _, err := synth.Generate(synth.Config{MountingDeg: 10, Rate: 250, RecordTargetHeading: true, TargetHeadingDeg: 30,
		Handedness:   kinchainv1.Handedness_HANDEDNESS_LEFT,
		SegmentRates: map[kinchainv1.Segment]float64{kinchainv1.Segment_SEGMENT_CLUB: 500}})
	if err != nil {
		t.Fatal(err)
	}
	capt.Neutral = &kinchainv1.TimeWindow{StartS: 0.1, EndS: 0.5}
	opts := &kinchainv1.AnalysisOptions{RateHz: 250}
	h, err := HeaderFor(capt, opts)
	if err != nil {
		t.Fatal(err)
	}
	if math.Abs(h.RateHz-500) > 1e-6 {
		t.Errorf("rate %g Hz, want the highest track rate, 500", h.RateHz)
	}
	if len(h.Mountings) != len(capt.Tracks) || !proto.Equal(h.Mountings[3], capt.Tracks[3].Mounting) {
		t.Errorf("mountings %v", h.Mountings)
	}
	var segs []kinchainv1.Segment
	for _, tr := range capt.Tracks {
		segs = append(segs, tr.Segment)
	}
	if !slices.Equal(h.Segments, segs) || h.Handedness != capt.Handedness || h.GetTargetHeadingDeg() != 30 || h.Club != capt.Club {
		t.Errorf("header %v", h)
	}
	if !proto.Equal(h.GetOptions().GetNeutral(), capt.Neutral) || h.GetOptions().GetRateHz() != 250 || opts.Neutral != nil {
		t.Errorf("options %v (the caller's %v must be left alone)", h.GetOptions(), opts)
	}
	if _, err := NewSession(h, Limits{}); err != nil {
		t.Errorf("the header is refused: %v", err)
	}
	capt.Tracks[0].Mounting = nil
	if h, _ := HeaderFor(capt, nil); len(h.Mountings) != 0 {
		t.Error("mountings announced although one track has none")
	}
	if _, err := HeaderFor(&kinchainv1.Capture{}, nil); err == nil {
		t.Error("a capture without tracks gave a header")
	}
}
