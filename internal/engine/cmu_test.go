package engine

import (
	"context"
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/num/quat"
	"gonum.org/v1/gonum/spatial/r3"
	"google.golang.org/protobuf/proto"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/bvh/bvhtest"
	"github.com/kinchain/kinchain/internal/rot"
)

// Real human motion: the CMU Graphics Lab golf swings, subject 64, trials
// 08 and 09 (mocap.cs.cmu.edu; BVH at 120 Hz, see
// ../shared/data/cmu-golf/README.md), converted to our frames by
// internal/bvh. These are slow practice swings by an amateur without a club.

func analyzeCMU(t *testing.T, c *kinchainv1.Capture) *kinchainv1.AnalyzeCaptureResponse {
	t.Helper()
	resp, err := New(Config{}).Analyze(context.Background(), &kinchainv1.AnalyzeCaptureRequest{Capture: c})
	if err != nil {
		t.Fatalf("Analyze: %v", err)
	}
	return resp
}

func eventTimes(sw *kinchainv1.SwingReport) map[kinchainv1.EventKind]float64 {
	m := map[kinchainv1.EventKind]float64{}
	for _, e := range sw.GetEvents() {
		m[e.GetKind()] = e.GetTimeS()
	}
	return m
}

func peakTime(sw *kinchainv1.SwingReport, s kinchainv1.Segment) (float64, bool) {
	for _, p := range sw.GetSequence() {
		if p.GetSegment() == s {
			return p.GetPeakTimeS(), true
		}
	}
	return 0, false
}

// TestCMUSpeedsPlausible: every segment's whole-capture peak speed is
// finite and within what a human body reaches in a swing. Bounds: trunk
// segments 100–1500 °/s, arm and hand segments 200–3000 °/s (common
// practice, no source; amateur practice swings sit in the lower part).
func TestCMUSpeedsPlausible(t *testing.T) {
	for _, trial := range bvhtest.Trials {
		t.Run(trial, func(t *testing.T) {
			resp := analyzeCMU(t, bvhtest.Capture(t, trial))
			if len(resp.GetSegments()) != 9 {
				t.Fatalf("%d segments, want the 9 converted joints", len(resp.GetSegments()))
			}
			for _, s := range resp.GetSegments() {
				v := s.GetPeakSpeedDegPerS()
				lo, hi := 200.0, 3000.0
				switch s.GetSegment() {
				case kinchainv1.Segment_SEGMENT_PELVIS, kinchainv1.Segment_SEGMENT_THORAX, kinchainv1.Segment_SEGMENT_HEAD:
					lo, hi = 100, 1500
				}
				if math.IsNaN(v) || math.IsInf(v, 0) || v < lo || v > hi {
					t.Errorf("%v peak %.1f deg/s outside [%g, %g]", s.GetSegment(), v, lo, hi)
				}
				// The files' Frame Time is 0.008333 s, 120 Hz to 4 ppm.
				if math.Abs(s.GetSampleRateHz()-120) > 0.01 {
					t.Errorf("%v sample rate %g Hz, want 120 (README)", s.GetSegment(), s.GetSampleRateHz())
				}
			}
		})
	}
}

// TestCMUSwingEvents: one swing per trial with its events in order, a
// downswing between 0.2 and 0.8 s and shorter than the backswing, and the
// pelvis peaking before the lead hand (facts of the trade: common practice,
// no source).
func TestCMUSwingEvents(t *testing.T) {
	for _, trial := range bvhtest.Trials {
		t.Run(trial, func(t *testing.T) {
			resp := analyzeCMU(t, bvhtest.Capture(t, trial))
			if n := len(resp.GetSwings()); n != 1 {
				t.Fatalf("%d swings, want 1 (warnings: %v)", n, resp.GetQuality().GetWarnings())
			}
			sw := resp.GetSwings()[0]
			ev := eventTimes(sw)
			order := []kinchainv1.EventKind{
				kinchainv1.EventKind_EVENT_KIND_ADDRESS,
				kinchainv1.EventKind_EVENT_KIND_TAKEAWAY,
				kinchainv1.EventKind_EVENT_KIND_TOP,
				kinchainv1.EventKind_EVENT_KIND_IMPACT,
				kinchainv1.EventKind_EVENT_KIND_FINISH,
			}
			for i, k := range order {
				if _, ok := ev[k]; !ok {
					t.Fatalf("no %v event (have %v)", k, sw.GetEvents())
				}
				if i > 0 && !(ev[order[i-1]] < ev[k]) {
					t.Errorf("%v at %.3f s is not before %v at %.3f s", order[i-1], ev[order[i-1]], k, ev[k])
				}
			}
			tm := sw.GetTempo()
			if tm.GetDownswingS() < 0.2 || tm.GetDownswingS() > 0.8 {
				t.Errorf("downswing %.3f s outside 0.2–0.8 s", tm.GetDownswingS())
			}
			if !(tm.GetDownswingS() < tm.GetBackswingS()) {
				t.Errorf("downswing %.3f s not shorter than backswing %.3f s", tm.GetDownswingS(), tm.GetBackswingS())
			}
			pel, ok1 := peakTime(sw, kinchainv1.Segment_SEGMENT_PELVIS)
			hand, ok2 := peakTime(sw, kinchainv1.Segment_SEGMENT_LEAD_HAND)
			if !ok1 || !ok2 {
				t.Fatalf("sequence lacks pelvis or lead hand: %v", sw.GetSequence())
			}
			if !(pel < hand) {
				t.Errorf("pelvis peak %.3f s not before lead-hand peak %.3f s", pel, hand)
			}
		})
	}
}

// transform applies q_new = pre ⊗ q ⊗ post to every sample of every track:
// pre a world rotation (heading change), post a body-fixed rotation (a
// sensor mounted at an angle, which the capture then declares in its
// mounting field so the segment orientation is unchanged).
func transform(c *kinchainv1.Capture, pre quat.Number, post func(i int) quat.Number, declare bool) *kinchainv1.Capture {
	out := proto.Clone(c).(*kinchainv1.Capture)
	for i, tr := range out.GetTracks() {
		m := post(i)
		for k := range tr.Qw {
			q := quat.Number{Real: tr.Qw[k], Imag: tr.Qx[k], Jmag: tr.Qy[k], Kmag: tr.Qz[k]}
			q = rot.Mul(rot.Mul(pre, q), m)
			tr.Qw[k], tr.Qx[k], tr.Qy[k], tr.Qz[k] = q.Real, q.Imag, q.Jmag, q.Kmag
		}
		if declare {
			// q_sensor = q_segment ⊗ m, so the sensor's orientation in the
			// segment frame is m.
			tr.Mounting = &kinchainv1.Quaternion{W: m.Real, X: m.Imag, Y: m.Jmag, Z: m.Kmag}
		}
	}
	return out
}

// TestCMUReportInvariant: the report does not change (≤ 1 %) under a world
// heading change or under constant sensor-mounting rotations that the
// capture declares. Both leave the physical motion unchanged, so this is an
// identity of rigid-body kinematics.
func TestCMUReportInvariant(t *testing.T) {
	r := rand.New(rand.NewPCG(11, 12))
	mounts := make([]quat.Number, 16)
	for i := range mounts {
		axis := r3.Vec{X: r.NormFloat64(), Y: r.NormFloat64(), Z: r.NormFloat64()}
		mounts[i] = rot.FromAxisAngle(axis, 0.3+r.Float64()*2.5)
	}
	cases := []struct {
		name    string
		pre     quat.Number
		post    func(int) quat.Number
		declare bool
	}{
		{"heading+117deg", rot.YawRotation(117 * math.Pi / 180), func(int) quat.Number { return rot.Identity }, false},
		{"mounting", rot.Identity, func(i int) quat.Number { return mounts[i] }, true},
		{"both", rot.YawRotation(-40 * math.Pi / 180), func(i int) quat.Number { return mounts[i] }, true},
	}
	for _, trial := range bvhtest.Trials {
		base := bvhtest.Capture(t, trial)
		want := analyzeCMU(t, base)
		for _, tc := range cases {
			t.Run(trial+"/"+tc.name, func(t *testing.T) {
				got := analyzeCMU(t, transform(base, tc.pre, tc.post, tc.declare))
				compareReports(t, want, got, 0.01)
			})
		}
	}
}

// compareReports checks speeds, event times and posture angles of two
// reports of the same motion: speeds within rel, times within one sample,
// angles within 1° (the ≤ 1 % bound taken on a 100° scale).
func compareReports(t *testing.T, a, b *kinchainv1.AnalyzeCaptureResponse, rel float64) {
	t.Helper()
	dt := 1 / a.GetSampleRateHz()
	if len(a.GetSegments()) != len(b.GetSegments()) {
		t.Fatalf("%d segments vs %d", len(a.GetSegments()), len(b.GetSegments()))
	}
	for i, s := range a.GetSegments() {
		o := b.GetSegments()[i]
		if d := math.Abs(s.GetPeakSpeedDegPerS()-o.GetPeakSpeedDegPerS()) / s.GetPeakSpeedDegPerS(); d > rel {
			t.Errorf("%v peak speed %.2f vs %.2f deg/s (%.2f %%)", s.GetSegment(), s.GetPeakSpeedDegPerS(), o.GetPeakSpeedDegPerS(), d*100)
		}
	}
	if len(a.GetSwings()) != len(b.GetSwings()) {
		t.Fatalf("%d swings vs %d", len(a.GetSwings()), len(b.GetSwings()))
	}
	for i, sa := range a.GetSwings() {
		sb := b.GetSwings()[i]
		if len(sa.GetSequence()) != len(sb.GetSequence()) || len(sa.GetPostures()) != len(sb.GetPostures()) {
			t.Fatalf("swing %d: %d/%d sequence rows and %d/%d postures", i,
				len(sa.GetSequence()), len(sb.GetSequence()), len(sa.GetPostures()), len(sb.GetPostures()))
		}
		ea, eb := eventTimes(sa), eventTimes(sb)
		for k, v := range ea {
			if math.Abs(v-eb[k]) > dt+1e-9 {
				t.Errorf("swing %d %v at %.4f s vs %.4f s", i, k, v, eb[k])
			}
		}
		for j, p := range sa.GetSequence() {
			q := sb.GetSequence()[j]
			if d := math.Abs(p.GetPeakSpeedDegPerS()-q.GetPeakSpeedDegPerS()) / p.GetPeakSpeedDegPerS(); d > rel {
				t.Errorf("swing %d %v sequence peak %.2f vs %.2f", i, p.GetSegment(), p.GetPeakSpeedDegPerS(), q.GetPeakSpeedDegPerS())
			}
		}
		for j, p := range sa.GetPostures() {
			q := sb.GetPostures()[j]
			for _, pair := range [][2]*kinchainv1.BodyAngles{{p.GetPelvis(), q.GetPelvis()}, {p.GetThorax(), q.GetThorax()}, {p.GetSeparation(), q.GetSeparation()}} {
				x, y := pair[0], pair[1]
				if x == nil || y == nil {
					continue
				}
				for _, d := range []float64{
					x.GetAxialRotationDeg() - y.GetAxialRotationDeg(),
					x.GetFlexionDeg() - y.GetFlexionDeg(),
					x.GetLateralBendDeg() - y.GetLateralBendDeg(),
				} {
					if math.Abs(d) > 1 {
						t.Errorf("swing %d posture at %v differs by %.2f°: %v vs %v", i, p.GetEvent(), d, x, y)
					}
				}
			}
		}
	}
}
