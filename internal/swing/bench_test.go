package swing

import (
	"testing"
	"time"

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

// BenchmarkAnalyzeShare runs conditioning + kinematics and the analysis in
// turn on the benchmark capture and reports the analysis time as a
// percentage of the pipeline's ("analyze-%", budget 20), so that the ratio
// is measured side by side under the same machine load.
func BenchmarkAnalyzeShare(b *testing.B) {
	cc := benchCapture(b)
	var pipe, an time.Duration
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		t0 := time.Now()
		cond, err := condition.Run(cc, condition.Options{})
		if err != nil {
			b.Fatal(err)
		}
		kin, err := kinematics.Compute(cond, kinematics.Options{})
		if err != nil {
			b.Fatal(err)
		}
		t1 := time.Now()
		if reps, _ := Analyze(kin, Options{}); len(reps) != 1 {
			b.Fatalf("%d swings, want 1", len(reps))
		}
		t2 := time.Now()
		pipe += t1.Sub(t0)
		an += t2.Sub(t1)
	}
	b.ReportMetric(100*float64(an)/float64(pipe), "analyze-%")
}
