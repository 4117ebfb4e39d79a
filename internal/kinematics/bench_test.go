package kinematics

import (
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/spatial/r3"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/capture"
	"github.com/kinchain/kinchain/internal/condition"
	"github.com/kinchain/kinchain/internal/procstat"
	"github.com/kinchain/kinchain/internal/rot"
)

// benchCapture is a 3 s, six-segment, 1 kHz capture of closed-form swing
// motions, each sensor mounted with a random rotation, with a neutral
// window in which the segments are nearly still (no warnings). With
// inertial, the tracks also carry gyroscope and accelerometer columns.
func benchCapture(inertial bool) *capture.Capture {
	c := benchCaptureAt(1000)
	if !inertial {
		for i := range c.Tracks {
			c.Tracks[i].Gyro, c.Tracks[i].Accel = nil, nil
		}
	}
	return c
}

func benchCaptureAt(rate float64) *capture.Capture {
	r := rand.New(rand.NewPCG(101, 102))
	deg := math.Pi / 180
	segs := []kinchainv1.Segment{pelvis, thorax, kinchainv1.Segment_SEGMENT_LEAD_UPPER_ARM,
		kinchainv1.Segment_SEGMENT_LEAD_FOREARM, hand, club}
	c := &capture.Capture{ID: "bench", Neutral: &capture.Window{Start: 0, End: 0.3}}
	for k, s := range segs {
		m := swingMotion{randUnit(r), (500 + 350*float64(k)) * deg, 1.8 + 0.02*float64(k), 0.08 - 0.007*float64(k), 0.02 * float64(k), 1.1}
		tr := track(s, m, rate, 3, randUnit(r))
		tr.Accel = make([]r3.Vec, len(tr.Time))
		for i, q := range tr.Q {
			tr.Accel[i] = rot.InvRotate(q, r3.Vec{Z: condition.StandardGravity})
		}
		c.Tracks = append(c.Tracks, tr)
	}
	return c
}

// perSample runs op b.N times and reports wall and CPU time per input
// orientation sample.
func perSample(b *testing.B, samples int, op func()) {
	b.ReportAllocs()
	b.ResetTimer()
	cpu0 := int64(procstat.Self())
	for i := 0; i < b.N; i++ {
		op()
	}
	cpu := int64(procstat.Self()) - cpu0
	b.StopTimer()
	n := float64(b.N) * float64(samples)
	b.ReportMetric(float64(b.Elapsed().Nanoseconds())/n, "ns/sample")
	b.ReportMetric(float64(cpu)/n, "cpu-ns/sample")
}

// BenchmarkPipeline measures condition.Run followed by Compute with the
// default options (20 Hz, order-2 zero-phase filter) per orientation sample
// of the input, for orientation-only tracks.
func BenchmarkPipeline(b *testing.B) { benchPipeline(b, false) }

// BenchmarkPipelineInertial is BenchmarkPipeline with gyroscope and
// accelerometer columns on every track (resampled and rotated too).
func BenchmarkPipelineInertial(b *testing.B) { benchPipeline(b, true) }

func benchPipeline(b *testing.B, inertial bool) {
	c := benchCapture(inertial)
	perSample(b, c.Samples(), func() {
		cond, err := condition.Run(c, condition.Options{})
		if err != nil {
			b.Fatal(err)
		}
		if _, err := Compute(cond, Options{}); err != nil {
			b.Fatal(err)
		}
	})
}

// BenchmarkCondition and BenchmarkCompute split the pipeline.
func BenchmarkCondition(b *testing.B) {
	c := benchCapture(false)
	perSample(b, c.Samples(), func() {
		if _, err := condition.Run(c, condition.Options{}); err != nil {
			b.Fatal(err)
		}
	})
}

func BenchmarkCompute(b *testing.B) {
	c := benchCapture(false)
	cond, err := condition.Run(c, condition.Options{})
	if err != nil {
		b.Fatal(err)
	}
	perSample(b, c.Samples(), func() {
		if _, err := Compute(cond, Options{}); err != nil {
			b.Fatal(err)
		}
	})
}

// TestPipelineAllocations checks that allocations grow with the number of
// tracks, not with their length: quadrupling the samples per track (500 Hz
// to 2 kHz, 9000 more samples) must leave the allocation count unchanged,
// but for ±3: the sync.Pool workspaces of fmt and gonum/mat are emptied by
// garbage collections, whose number depends on the bytes allocated.
func TestPipelineAllocations(t *testing.T) {
	count := func(rate float64) float64 {
		c := benchCaptureAt(rate)
		return testing.AllocsPerRun(5, func() {
			cond, err := condition.Run(c, condition.Options{})
			if err != nil {
				t.Fatal(err)
			}
			// The capture is calibrated from its neutral window without an
			// explicit pelvis mounting, which is reported; nothing else is.
			for _, w := range cond.Warnings {
				if w.GetCode() != kinchainv1.WarningCode_WARNING_CODE_NEUTRAL_HEADING_ASSUMED {
					t.Fatalf("warning %v", w)
				}
			}
			if _, err := Compute(cond, Options{}); err != nil {
				t.Fatal(err)
			}
		})
	}
	a, b := count(500), count(2000)
	if math.Abs(a-b) > 3 {
		t.Errorf("allocations %v at 500 Hz, %v at 2 kHz: they grow with the samples", a, b)
	}
}
