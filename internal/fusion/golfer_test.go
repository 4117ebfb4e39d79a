package fusion

import (
	"fmt"
	"math"
	"testing"

	"gonum.org/v1/gonum/spatial/r3"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/rot"
	"github.com/kinchain/kinchain/internal/synth"
	"github.com/kinchain/kinchain/internal/validate"
)

// TestModelGolfer fuses the raw IMU tracks of the synthetic model golfer
// (package synth: closed-form segment motion, ideal gyroscope and
// accelerometer readings plus noise and a constant bias, a uniform field)
// and checks each segment's peak angular speed in its downswing window,
// recomputed from the fused orientations, against synth's Truth, computed
// from the closed form: within 2 % (issue text). The fused orientations
// must also match the model's within 3° after removing one constant
// heading offset per track (measured: 2.4° at the club, whose sensor moves
// 1.5 m at up to ≈ 20 m/s: VQF's accelerometer low-pass lets a little of
// the velocity through, see DEVELOPERS.md, "Fusion"), and that offset must be the
// +90° between the model's world (field along +x) and VQF's (field along
// +y). The model's still lead-in is 1 s, shorter than VQF's start-up
// averaging (TauAcc = 3 s): this also checks Track's priming.
//
// Two gyroscope noise levels: 0.005 rad/s and a noisy 0.01 rad/s (≈ 0.6 °/s
// per axis and sample), at which single readings scatter past VQF's 2 °/s
// rest threshold, so the still lead-in is only found through block means.
func TestModelGolfer(t *testing.T) {
	for _, noise := range []float64{0.005, 0.01} {
		t.Run(fmt.Sprintf("gyro_noise_%g", noise), func(t *testing.T) {
			checkModelGolfer(t, synth.Config{
				Seed: 4, IMU: true, OmitQuaternions: true, Magnetometer: true,
				GyroNoise: noise, GyroBias: 0.5 * deg, AccelNoise: 0.05,
			})
		})
	}
}

func checkModelGolfer(t *testing.T, cfg synth.Config) {
	pc, truth, err := synth.Generate(cfg)
	if err != nil {
		t.Fatal(err)
	}
	c, err := validate.Capture(pc, validate.Limits{}, nil)
	if err != nil {
		t.Fatal(err)
	}
	sw := truth.Swings[0]
	for i := range c.Tracks {
		tr := &c.Tracks[i]
		name := segmentName(tr.Segment)
		rep, err := Track(tr, Options{})
		if err != nil {
			t.Fatal(err)
		}
		if rep.PrimedSpan < 0.9 {
			t.Errorf("%s: primed from %.3f s of the 1 s still lead-in", name, rep.PrimedSpan)
		}
		// Peak speed in the downswing window (synth.PeakWindowAfterImpact).
		from := math.Min(sw.Top, sw.Transitions[tr.Segment])
		to := sw.Impact + synth.PeakWindowAfterImpact
		peak := 0.0
		for k := 1; k < len(tr.Time); k++ {
			if tr.Time[k] < from || tr.Time[k] > to {
				continue
			}
			w := r3.Norm(rot.ToRotVec(rot.Mul(rot.Conj(tr.Q[k-1]), tr.Q[k]))) / (tr.Time[k] - tr.Time[k-1])
			peak = math.Max(peak, w/deg)
		}
		want := sw.Peaks[tr.Segment].SpeedDegPerS
		if math.Abs(peak/want-1) > 0.02 {
			t.Errorf("%s: peak %.1f °/s, truth %.1f °/s (%+.2f %%)", name, peak, want, 100*(peak/want-1))
		}
		// Orientation against the model, heading offset removed.
		var sx, sy float64
		for k, tt := range tr.Time {
			e := rot.Mul(tr.Q[k], rot.Conj(truth.Model.Orientation(tr.Segment, tt)))
			h := 2 * math.Atan2(e.Kmag, e.Real)
			sx += math.Cos(h)
			sy += math.Sin(h)
		}
		off := math.Atan2(sy, sx)
		fix := rot.YawRotation(-off)
		worst := 0.0
		for k, tt := range tr.Time {
			if tt < 0.5 {
				continue
			}
			worst = math.Max(worst, rot.Angle(rot.Mul(fix, tr.Q[k]), truth.Model.Orientation(tr.Segment, tt)))
		}
		t.Logf("%-16s peak %7.1f °/s (truth %7.1f, %+.2f %%), worst error %.2f°, heading offset %.1f°, findings %d", name, peak, want, 100*(peak/want-1), worst/deg, off/deg, len(rep.Saturations))
		if worst > 3*deg {
			t.Errorf("%s: orientation off the model by up to %.2f°", name, worst/deg)
		}
		if math.Abs(off/deg-90) > 2 {
			t.Errorf("%s: heading offset %.1f°, want ≈ +90° (field along model +x, VQF +y)", name, off/deg)
		}
		// The model club turns at 2200 °/s: its gyroscope exceeds a
		// 2000 °/s range, and the ball-strike shock its accelerometer's
		// 16 g (synth.DefaultImpactShock 400 m/s²).
		if tr.Segment == kinchainv1.Segment_SEGMENT_CLUB && (!rep.GyroSaturated() || !rep.AccelClipped()) {
			t.Errorf("club: saturation not reported (%+v)", rep.Saturations)
		}
	}
}
