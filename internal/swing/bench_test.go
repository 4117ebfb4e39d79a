package swing

import (
	"testing"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/capture"
	"github.com/kinchain/kinchain/internal/condition"
	"github.com/kinchain/kinchain/internal/kinematics"
	"github.com/kinchain/kinchain/internal/synth"
	"github.com/kinchain/kinchain/internal/validate"
)

// benchCapture is a 3 s capture of six segments at 1000 Hz holding one
// swing.
func benchCapture(b *testing.B) *capture.Capture {
	b.Helper()
	c, _, err := synth.Generate(synth.Config{LeadIn: 0.7, Tail: 0.5, Duration: 3, Segments: []kinchainv1.Segment{
		pelvis, thorax, leadArm, leadFore, leadHand, clubSeg}})
	if err != nil {
		b.Fatal(err)
	}
	cc, err := validate.Capture(c, validate.Limits{}, nil)
	if err != nil {
		b.Fatal(err)
	}
	return cc
}

// BenchmarkPipeline times conditioning and kinematics (default filter) of
// the benchmark capture: the budget of BenchmarkAnalyze is 20 % of it.
func BenchmarkPipeline(b *testing.B) {
	cc := benchCapture(b)
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		cond, err := condition.Run(cc, condition.Options{})
		if err != nil {
			b.Fatal(err)
		}
		if _, err := kinematics.Compute(cond, kinematics.Options{}); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkAnalyze times the swing analysis of the benchmark capture.
func BenchmarkAnalyze(b *testing.B) {
	cc := benchCapture(b)
	cond, err := condition.Run(cc, condition.Options{})
	if err != nil {
		b.Fatal(err)
	}
	kin, err := kinematics.Compute(cond, kinematics.Options{})
	if err != nil {
		b.Fatal(err)
	}
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		reps, _ := Analyze(kin, Options{})
		if len(reps) != 1 {
			b.Fatalf("%d swings, want 1", len(reps))
		}
	}
}
