package kinematics

import (
	"math"
	"math/rand/v2"
	"syscall"
	"testing"

	"gonum.org/v1/gonum/num/quat"
	"gonum.org/v1/gonum/spatial/r3"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/capture"
	"github.com/kinchain/kinchain/internal/condition"
	"github.com/kinchain/kinchain/internal/rot"
)

// benchCapture is a 3 s, six-segment, 1 kHz capture of closed-form swing
// motions, each sensor mounted with a random rotation and carrying
// gyroscope and accelerometer columns, with a neutral window.
func benchCapture() *capture.Capture {
	r := rand.New(rand.NewPCG(101, 102))
	deg := math.Pi / 180
	segs := []kinchainv1.Segment{pelvis, thorax, kinchainv1.Segment_SEGMENT_LEAD_UPPER_ARM,
		kinchainv1.Segment_SEGMENT_LEAD_FOREARM, hand, club}
	c := &capture.Capture{ID: "bench", Neutral: &capture.Window{Start: 0, End: 0.3}}
	for k, s := range segs {
		m := swingMotion{randUnit(r), (500 + 350*float64(k)) * deg, 1.8 + 0.02*float64(k), 0.08 - 0.007*float64(k), 0.1 * float64(k), 1.1}
		tr := track(s, m, 1000, 3, randUnit(r))
		tr.Accel = make([]r3.Vec, len(tr.Time))
		for i, q := range tr.Q {
			tr.Accel[i] = rot.InvRotate(q, r3.Vec{Z: condition.StandardGravity})
		}
		c.Tracks = append(c.Tracks, tr)
	}
	return c
}

// cpuNanos returns the CPU time (user + system) the process has used, ns.
// On a shared machine it measures the work done better than wall time,
// which also counts time spent waiting for a core.
func cpuNanos() int64 {
	var ru syscall.Rusage
	if err := syscall.Getrusage(syscall.RUSAGE_SELF, &ru); err != nil {
		return 0
	}
	return ru.Utime.Nano() + ru.Stime.Nano()
}

// perSample runs op b.N times and reports wall and CPU time per input
// orientation sample.
func perSample(b *testing.B, samples int, op func()) {
	b.ReportAllocs()
	b.ResetTimer()
	cpu0 := cpuNanos()
	for i := 0; i < b.N; i++ {
		op()
	}
	cpu := cpuNanos() - cpu0
	b.StopTimer()
	n := float64(b.N) * float64(samples)
	b.ReportMetric(float64(b.Elapsed().Nanoseconds())/n, "ns/sample")
	b.ReportMetric(float64(cpu)/n, "cpu-ns/sample")
}

// BenchmarkPipeline measures condition.Run followed by Compute with the
// default options (20 Hz, order-2 zero-phase filter) per orientation sample
// of the input.
func BenchmarkPipeline(b *testing.B) {
	c := benchCapture()
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
	c := benchCapture()
	perSample(b, c.Samples(), func() {
		if _, err := condition.Run(c, condition.Options{}); err != nil {
			b.Fatal(err)
		}
	})
}

func BenchmarkCompute(b *testing.B) {
	c := benchCapture()
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
// tracks, not with their length: doubling the samples per track must not
// change the allocation count.
func TestPipelineAllocations(t *testing.T) {
	count := func(rate float64) float64 {
		c := benchCapture()
		for i := range c.Tracks {
			tr := &c.Tracks[i]
			n := int(float64(len(tr.Time)) * rate / 1000)
			tr.Time, tr.Q, tr.Gyro, tr.Accel = resize(tr.Time, n, rate), make([]quat.Number, n), make([]r3.Vec, n), make([]r3.Vec, n)
			for j := range tr.Q {
				tr.Q[j] = rot.FromRotVec(r3.Vec{X: float64(j) / rate})
			}
		}
		return testing.AllocsPerRun(5, func() {
			cond, err := condition.Run(c, condition.Options{})
			if err != nil {
				t.Fatal(err)
			}
			if _, err := Compute(cond, Options{}); err != nil {
				t.Fatal(err)
			}
		})
	}
	a, b := count(500), count(1000)
	if a != b {
		t.Errorf("allocations %v at 500 Hz, %v at 1000 Hz: they grow with the samples", a, b)
	}
}

func resize(_ []float64, n int, rate float64) []float64 {
	t := make([]float64, n)
	for i := range t {
		t[i] = float64(i) / rate
	}
	return t
}
