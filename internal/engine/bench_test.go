package engine

import (
	"context"
	"testing"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/synth"
)

// benchCapture is the benchmark capture of the issue tracker's figures: the
// model golfer, 6 segments at 1000 Hz, trimmed to 3 s around the swing.
func benchCapture(b *testing.B) *kinchainv1.Capture {
	b.Helper()
	c, _, err := synth.Generate(synth.Config{
		Rate:     1000,
		Segments: []kinchainv1.Segment{kinchainv1.Segment_SEGMENT_PELVIS, kinchainv1.Segment_SEGMENT_THORAX, kinchainv1.Segment_SEGMENT_LEAD_UPPER_ARM, kinchainv1.Segment_SEGMENT_LEAD_FOREARM, kinchainv1.Segment_SEGMENT_LEAD_HAND, kinchainv1.Segment_SEGMENT_CLUB},
		LeadIn:   0.5,
		Duration: 3,
	})
	if err != nil {
		b.Fatal(err)
	}
	return c
}

// BenchmarkAnalyze measures the whole engine entry point — validation,
// conditioning, kinematics with the default filter, swing analysis and the
// response — per orientation sample.
func BenchmarkAnalyze(b *testing.B) {
	c := benchCapture(b)
	n := 0
	for _, t := range c.GetTracks() {
		n += len(t.GetTimeS())
	}
	e := New(Config{})
	req := &kinchainv1.AnalyzeCaptureRequest{Capture: c}
	b.ReportAllocs()
	b.ResetTimer()
	for b.Loop() {
		resp, err := e.Analyze(context.Background(), req)
		if err != nil || len(resp.GetSwings()) != 1 {
			b.Fatalf("analysis failed: %v", err)
		}
	}
	b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N)/float64(n), "ns/sample")
	b.ReportMetric(float64(n), "samples/op")
}
