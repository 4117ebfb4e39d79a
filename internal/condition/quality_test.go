package condition

import (
	"math"
	"math/rand/v2"
	"slices"
	"testing"

	"gonum.org/v1/gonum/num/quat"
	"gonum.org/v1/gonum/spatial/r3"
	"gonum.org/v1/gonum/stat"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/capture"
	"github.com/kinchain/kinchain/internal/rot"
)

// Reference: the definition of the median (middle value of the sorted
// sample, mean of the two middle values for an even count), computed by
// sorting; inputs include many ties.
func TestMedian(t *testing.T) {
	r := rand.New(rand.NewPCG(31, 32))
	for trial := 0; trial < 300; trial++ {
		n := 1 + r.IntN(200)
		v := make([]float64, n)
		for i := range v {
			v[i] = math.Round(r.NormFloat64() * float64(1+trial%5))
		}
		s := slices.Clone(v)
		slices.Sort(s)
		want := s[n/2]
		if n%2 == 0 {
			want = (s[n/2-1] + s[n/2]) / 2
		}
		if got := median(v); got != want {
			t.Fatalf("n %d: median %g, want %g", n, got, want)
		}
	}
	if !math.IsNaN(median(nil)) {
		t.Error("median of nothing is not NaN")
	}
}

// Reference: definitions in the TrackQuality message and gonum
// stat.StdDev: effective rate = 1/median interval, jitter = standard
// deviation of the intervals (ms), the TIMING_JITTER rule (> 10 % of the
// median), renormalised count and fused flag passed through, and
// hemisphere flips = the number of sign changes put into the input, which
// the output no longer has (and the input still has: Run leaves it alone).
func TestQualityFigures(t *testing.T) {
	r := rand.New(rand.NewPCG(33, 34))
	s := spin{randUnit(r), r3.Vec{X: 4, Y: 1, Z: -2}}
	for _, jitter := range []float64{0.02, 0.3} {
		ts := times(r, 0, 500, 1500, jitter)
		tr := spinTrack(pelvis, s, ts)
		flips := 0
		for i := range tr.Q {
			if i%7 == 3 {
				tr.Q[i] = rot.Neg(tr.Q[i])
				flips++ // Continuity negates it back; its successor then fits
			}
		}
		tr.Renormalized = 17
		tr.Fused = true
		res, err := Run(&capture.Capture{Tracks: []capture.Track{tr}}, Options{})
		if err != nil {
			t.Fatal(err)
		}
		for i := range tr.Q {
			if i%7 == 3 && rot.Dot(tr.Q[i], s.at(ts[i])) > 0 {
				t.Fatalf("Run changed its input at sample %d", i)
			}
		}
		for i, q := range res.Segments[0].Q {
			if i > 0 && rot.Dot(res.Segments[0].Q[i-1], q) < 0 {
				t.Fatalf("output discontinuous at %d", i)
			}
		}
		q := res.Segments[0].Quality
		iv := make([]float64, len(ts)-1)
		for i := range iv {
			iv[i] = ts[i+1] - ts[i]
		}
		sorted := slices.Clone(iv)
		slices.Sort(sorted)
		med := sorted[len(iv)/2] // 1499 intervals: odd count
		sd := stat.StdDev(iv, nil)
		if math.Abs(q.GetEffectiveRateHz()-1/med) > 1e-9 || math.Abs(q.GetJitterMs()-sd*1000) > 1e-9 {
			t.Errorf("jitter %g: rate %g Hz, jitter %g ms; want %g Hz, %g ms", jitter, q.GetEffectiveRateHz(), q.GetJitterMs(), 1/med, sd*1000)
		}
		if q.GetSamples() != 1500 || q.GetRenormalizedSamples() != 17 || !q.GetFused() || q.GetGaps() != 0 {
			t.Errorf("quality %v", q)
		}
		if int(q.GetHemisphereFlips()) != flips {
			t.Errorf("hemisphere flips %d, want %d", q.GetHemisphereFlips(), flips)
		}
		warned := hasWarning(res.Warnings, kinchainv1.WarningCode_WARNING_CODE_TIMING_JITTER, pelvis) != nil
		if want := sd > 0.1*med; warned != want || (jitter == 0.3) != want {
			t.Errorf("jitter %g: sd/median %.3f, warning %v", jitter, sd/med, warned)
		}
		if hasWarning(res.Warnings, kinchainv1.WarningCode_WARNING_CODE_RENORMALIZED, pelvis) == nil {
			t.Errorf("no RENORMALIZED warning")
		}
	}
}

// Reference: our documented saturation rule (plateau at the series'
// largest |component| for ≥ 5 samples, above 250 °/s or 2 g). A clipped
// fast sine (2500 °/s clipped at 2000 °/s, 16 g clipped at 8 g) is found at
// its first clipped sample; the same sines unclipped, a 1 kHz smooth peak,
// and a still, quantised sensor are not.
func TestSaturation(t *testing.T) {
	const rate = 1000.0
	n := 1000
	ts := times(nil, 0, rate, n, 0)
	mk := func(amp, clip, bias float64, quantum float64) []r3.Vec {
		v := make([]r3.Vec, n)
		for i := range v {
			x := amp*math.Sin(2*math.Pi*1.3*ts[i]) + bias
			x = math.Max(-clip, math.Min(clip, x))
			if quantum > 0 {
				x = math.Round(x/quantum) * quantum
			}
			v[i] = r3.Vec{X: 0.1 * x, Y: x, Z: 0.3}
		}
		return v
	}
	deg := math.Pi / 180
	g := StandardGravity
	for _, c := range []struct {
		name        string
		gyro, accel []r3.Vec
		sat, clip   bool
	}{
		{"clipped", mk(2500*deg, 2000*deg, 0, 0), mk(16*g, 8*g, 0, 0), true, true},
		{"unclipped", mk(2500*deg, math.Inf(1), 0, 0), mk(16*g, math.Inf(1), 0, 0), false, false},
		{"quantised 16-bit", mk(2500*deg, math.Inf(1), 0, 4000*deg/65536), mk(16*g, math.Inf(1), 0, 32*g/65536), false, false},
		{"still", mk(0, 1, 0.01, 0.0175), mk(0, 1, g, 0.01), false, false},
	} {
		tr := capture.Track{Segment: club, Time: ts, Q: make([]quat.Number, n), Gyro: c.gyro, Accel: c.accel}
		for i := range tr.Q {
			tr.Q[i] = rot.Identity
		}
		res, err := Run(&capture.Capture{Tracks: []capture.Track{tr}}, Options{})
		if err != nil {
			t.Fatal(err)
		}
		q := res.Segments[0].Quality
		if q.GetGyroSaturationSuspected() != c.sat || q.GetAccelClippingSuspected() != c.clip {
			t.Errorf("%s: gyro saturation %v, accel clipping %v; want %v, %v", c.name, q.GetGyroSaturationSuspected(), q.GetAccelClippingSuspected(), c.sat, c.clip)
		}
		w := hasWarning(res.Warnings, kinchainv1.WarningCode_WARNING_CODE_GYRO_SATURATION, club)
		if (w != nil) != c.sat {
			t.Errorf("%s: gyro warning %v", c.name, w)
		}
		if c.sat {
			// First clipped sample: 2500 sin(2π·1.3 t) = 2000 at
			// t = asin(0.8)/(2π·1.3).
			first := math.Asin(0.8) / (2 * math.Pi * 1.3)
			if math.Abs(w.GetTimeS()-first) > 1.5/rate {
				t.Errorf("%s: saturation at %g s, want %g s", c.name, w.GetTimeS(), first)
			}
		}
		if (hasWarning(res.Warnings, kinchainv1.WarningCode_WARNING_CODE_ACCEL_CLIPPING, club) != nil) != c.clip {
			t.Errorf("%s: accel warning mismatch", c.name)
		}
	}
}
