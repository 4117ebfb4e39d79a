package stream

import (
	"testing"

	"google.golang.org/protobuf/proto"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/synth"
)

// sixSegments are the segments of the benchmark streams.
var sixSegments = []kinchainv1.Segment{
	kinchainv1.Segment_SEGMENT_PELVIS, kinchainv1.Segment_SEGMENT_THORAX,
	kinchainv1.Segment_SEGMENT_LEAD_UPPER_ARM, kinchainv1.Segment_SEGMENT_LEAD_FOREARM,
	kinchainv1.Segment_SEGMENT_LEAD_HAND, kinchainv1.Segment_SEGMENT_CLUB,
}

// benchStream returns the header, the 10 ms batches, the frames and the
// span (s) of a synthetic capture.
func benchStream(b *testing.B, cfg synth.Config) (*kinchainv1.StreamHeader, []*kinchainv1.SampleBatch, int, float64) {
	c, _, err := synth.Generate(cfg)
	if err != nil {
		b.Fatal(err)
	}
	h, err := HeaderFor(c, nil)
	if err != nil {
		b.Fatal(err)
	}
	var batches []*kinchainv1.SampleBatch
	if err := Split(c, 0.010, func(bt *kinchainv1.SampleBatch, _ float64) error {
		batches = append(batches, bt)
		return nil
	}); err != nil {
		b.Fatal(err)
	}
	ts := c.GetTracks()[0].GetTimeS()
	span := ts[len(ts)-1] - ts[0] + (ts[1] - ts[0])
	return h, batches, len(ts), span
}

// runPush pushes b.N batches into one session, cycling through batches
// and moving their times on by span at each cycle, so that the session runs
// in its steady state (full rings) as a long live stream does.
func runPush(b *testing.B, h *kinchainv1.StreamHeader, batches []*kinchainv1.SampleBatch, frames int, span float64, analyse bool) {
	s, err := NewSession(h, Limits{})
	if err != nil {
		b.Fatal(err)
	}
	s.skipAnalysis = !analyse
	// Warm up: one cycle fills the rings.
	push := func(bt *kinchainv1.SampleBatch) {
		if _, err := s.Push(bt); err != nil {
			b.Fatal(err)
		}
	}
	shift := func() {
		for _, bt := range batches {
			for _, t := range bt.Tracks {
				for k := range t.TimeS {
					t.TimeS[k] += span
				}
			}
		}
	}
	for _, bt := range batches {
		push(bt)
	}
	shift()
	reports := s.reports
	b.ReportAllocs()
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		k := i % len(batches)
		if k == 0 && i > 0 {
			b.StopTimer()
			shift()
			b.StartTimer()
		}
		push(batches[k])
	}
	b.StopTimer()
	perBatch := float64(frames) / float64(len(batches))
	b.ReportMetric(float64(b.Elapsed().Nanoseconds())/(float64(b.N)*perBatch), "ns/frame")
	if analyse {
		b.ReportMetric(float64(s.reports-reports)/(float64(b.N)*perBatch), "reports/frame")
	}
}

// BenchmarkPush streams the six-segment model golfer (three swings with
// their waggle, half swing and pauses, 10 ms batches) through one session
// in its steady state: validation, buffering and live detection. ns/frame
// is per frame of six samples. The per-swing batch analysis is left out
// (see BenchmarkPushWithAnalysis and BenchmarkSwingAnalysis).
func BenchmarkPush(b *testing.B) {
	h, batches, frames, span := benchStream(b, synth.Config{Segments: sixSegments, Swings: 3, Waggles: 1, HalfSwings: 1})
	runPush(b, h, batches, frames, span, false)
}

// BenchmarkPushWithAnalysis is BenchmarkPush with each swing's window
// analysed and reported, as a live stream does.
func BenchmarkPushWithAnalysis(b *testing.B) {
	h, batches, frames, span := benchStream(b, synth.Config{Segments: sixSegments, Swings: 3, Waggles: 1, HalfSwings: 1})
	runPush(b, h, batches, frames, span, true)
}

// BenchmarkSwingAnalysis times the batch analysis of one finished swing's
// window (copy out of the rings, validation, engine.AnalyzeValidated), the
// per-swing cost a stream adds to the per-frame cost of BenchmarkPush.
func BenchmarkSwingAnalysis(b *testing.B) {
	for _, c := range []struct {
		name string
		segs []kinchainv1.Segment
	}{{"six segments", sixSegments}, {"ten segments", nil}} {
		b.Run(c.name, func(b *testing.B) {
			capt, _, err := synth.Generate(synth.Config{Segments: c.segs})
			if err != nil {
				b.Fatal(err)
			}
			h, _ := HeaderFor(capt, nil)
			s, err := NewSession(h, Limits{})
			if err != nil {
				b.Fatal(err)
			}
			if err := Split(capt, 0.010, func(bt *kinchainv1.SampleBatch, _ float64) error {
				_, err := s.Push(bt)
				return err
			}); err != nil {
				b.Fatal(err)
			}
			if s.reports != 1 {
				b.Fatalf("%d reports", s.reports)
			}
			p := s.lastPending
			b.ReportAllocs()
			b.ResetTimer()
			for i := 0; i < b.N; i++ {
				if r := s.analyse(&p); r == nil {
					b.Fatal("no report")
				}
			}
			b.ReportMetric(p.t1-p.t0, "window-s")
		})
	}
}

// BenchmarkBatchUnmarshal times decoding one 10 ms six-segment batch from
// its wire form, the per-batch work of the gRPC layer in front of Push
// (for the streams-per-core estimate in DEVELOPERS.md, Performance,
// "Live streams").
func BenchmarkBatchUnmarshal(b *testing.B) {
	_, batches, _, _ := benchStream(b, synth.Config{Segments: sixSegments})
	req := &kinchainv1.StreamCaptureRequest{Message: &kinchainv1.StreamCaptureRequest_Batch{Batch: batches[len(batches)/2]}}
	wire, err := proto.Marshal(req)
	if err != nil {
		b.Fatal(err)
	}
	b.ReportAllocs()
	b.SetBytes(int64(len(wire)))
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		var r kinchainv1.StreamCaptureRequest
		if err := proto.Unmarshal(wire, &r); err != nil {
			b.Fatal(err)
		}
	}
	b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N)/10, "ns/frame")
}
