package synth

import (
	"math"
	"testing"

	"gonum.org/v1/gonum/num/quat"
	"gonum.org/v1/gonum/spatial/r3"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/rot"
)

func newModel(t *testing.T, cfg Config) *Model {
	t.Helper()
	m, err := NewModel(cfg)
	if err != nil {
		t.Fatal(err)
	}
	return m
}

// sampleTimes returns times spread over the whole timeline, including the
// waggle, half swing and return movements, avoiding the exact piece ends.
func sampleTimes(m *Model) []float64 {
	var ts []float64
	start := m.cfg.StartTime
	for t := start + 0.0137; t < m.End(); t += 0.0173 {
		ts = append(ts, t)
	}
	return ts
}

// The analytic angular velocity matches the central difference of the
// model's own orientation: ω ≈ 2·log(q(t+h) ⊗ q(t−h)*)/(2h), the rotation
// vector of the world-frame increment over 2h (central difference, Winter,
// Biomechanics and Motor Control of Human Movement, finite differences in
// the kinematics chapter, from memory; the
// rotation-vector form of the increment is the definition of ω for a
// rotation). Truncation error O(h²·|d³θ/dt³|), rounding O(ε/h).
func TestOmegaMatchesOrientationDifference(t *testing.T) {
	const h = 1e-6
	for _, cfg := range []Config{
		{Waggles: 1, HalfSwings: 1, Swings: 2},
		{Handedness: kinchainv1.Handedness_HANDEDNESS_LEFT, TargetHeadingDeg: 123, Tempo: 2, Downswing: 0.35},
	} {
		m := newModel(t, cfg)
		for _, s := range AllSegments {
			for _, tt := range sampleTimes(m) {
				inc := rot.Mul(m.Orientation(s, tt+h), rot.Conj(m.Orientation(s, tt-h)))
				num := r3.Scale(1/(2*h), rot.ToRotVec(inc))
				w := m.Omega(s, tt)
				if d := r3.Norm(r3.Sub(num, w)); d > 1e-6+1e-7*r3.Norm(w) {
					t.Fatalf("%v at %.4f s: analytic ω %v, difference %v (off by %g rad/s)", s, tt, w, num, d)
				}
			}
		}
	}
}

// dω/dt matches the central difference of the analytic ω.
func TestAngularAccelerationMatchesOmegaDifference(t *testing.T) {
	const h = 1e-6
	m := newModel(t, Config{Handedness: kinchainv1.Handedness_HANDEDNESS_LEFT, Waggles: 1})
	for _, s := range AllSegments {
		for _, tt := range sampleTimes(m) {
			num := r3.Scale(1/(2*h), r3.Sub(m.Omega(s, tt+h), m.Omega(s, tt-h)))
			a := m.AngularAcceleration(s, tt)
			if d := r3.Norm(r3.Sub(num, a)); d > 1e-3+1e-6*r3.Norm(a) {
				t.Fatalf("%v at %.4f s: analytic α %v, difference %v", s, tt, a, num)
			}
		}
	}
}

// The sensor acceleration matches the second central difference of the
// sensor position (Winter, as above), away from the impact shock, which is a
// force on the club and not part of the limb motion.
func TestSensorAccelerationMatchesPositionDifference(t *testing.T) {
	const h = 1e-4
	m := newModel(t, Config{Handedness: kinchainv1.Handedness_HANDEDNESS_LEFT, TargetHeadingDeg: -30})
	imp := m.swings[0].impact
	for _, s := range AllSegments {
		for _, tt := range sampleTimes(m) {
			if s == club && tt >= imp && tt < imp+0.06 {
				continue
			}
			p0, p1, p2 := m.SensorPosition(s, tt-h), m.SensorPosition(s, tt), m.SensorPosition(s, tt+h)
			num := r3.Scale(1/(h*h), r3.Add(r3.Sub(p0, r3.Scale(2, p1)), p2))
			a := m.SensorAcceleration(s, tt)
			if d := r3.Norm(r3.Sub(num, a)); d > 0.05+1e-4*r3.Norm(a) {
				t.Fatalf("%v at %.4f s: analytic a %v, difference %v (off %g m/s²)", s, tt, a, num, d)
			}
		}
	}
	// The shock starts at impact, along the club face's opposite.
	before := m.SensorAcceleration(club, imp-1e-9)
	after := m.SensorAcceleration(club, imp+1e-9)
	if d := r3.Norm(r3.Sub(after, before)); math.Abs(d-DefaultImpactShock) > 1 {
		t.Fatalf("shock at impact changes the acceleration by %.1f m/s², want %g", d, DefaultImpactShock)
	}
}

// frameOf returns the orientation of s in the right-handed target-line
// frame (undoing the heading and, for a left-handed player, the mirror),
// computed from the world orientation only.
func frameOf(m *Model, s kinchainv1.Segment, t float64) quat.Number {
	q := rot.Mul(rot.YawRotation(-m.TargetFrameHeading()), m.Orientation(s, t))
	if m.left {
		q = quat.Number{Real: q.Real, Imag: -q.Imag, Jmag: q.Jmag, Kmag: -q.Kmag}
	}
	return q
}

// planeAngle is an independent implementation of the in-plane angle: the
// angle in the plane spanned by the target line y and the segment's −z
// axis at address0 of its −z axis at t (positive toward the target).
func planeAngle(m *Model, s kinchainv1.Segment, address0, t float64) float64 {
	y := r3.Vec{Y: 1}
	p0 := rot.Rotate(frameOf(m, s, address0), r3.Vec{Z: -1})
	n := r3.Unit(r3.Cross(p0, y))
	e1 := r3.Unit(r3.Sub(p0, r3.Scale(r3.Dot(p0, n), n)))
	e2 := r3.Cross(n, e1)
	p := rot.Rotate(frameOf(m, s, t), r3.Vec{Z: -1})
	return math.Atan2(r3.Dot(p, e2), r3.Dot(p, e1))
}

// heading returns the heading of s's x axis in the target-line frame.
func heading(m *Model, s kinchainv1.Segment, t float64) float64 {
	x := rot.Rotate(frameOf(m, s, t), r3.Vec{X: 1})
	return math.Atan2(x.Y, x.X)
}

// The truth agrees with the model's geometry, computed here independently
// from the world orientations.
func TestTruthSelfConsistency(t *testing.T) {
	for _, cfg := range []Config{
		{},
		{Handedness: kinchainv1.Handedness_HANDEDNESS_LEFT, TargetHeadingDeg: 77, Swings: 2, Tempo: 2.5},
		{LateThorax: true, Downswing: 0.3},
		{EarlyRelease: true},
	} {
		_, tr, err := Generate(cfg)
		if err != nil {
			t.Fatal(err)
		}
		m := tr.Model
		c := m.Config()
		if len(tr.Swings) != c.Swings {
			t.Fatalf("%d swings in the truth, want %d", len(tr.Swings), c.Swings)
		}
		for _, st := range tr.Swings {
			a0 := st.Address - 0.1
			// Still before the takeaway, moving right after it.
			for _, s := range AllSegments {
				if w := r3.Norm(m.Omega(s, st.Takeaway-1e-6)); w != 0 {
					t.Fatalf("%v moves (%g rad/s) before the takeaway", s, w)
				}
			}
			if w := r3.Norm(m.Omega(club, st.Takeaway+0.01)); w == 0 {
				t.Fatal("club still after the takeaway")
			}
			// Impact: the club's angle in its address plane is back at 0,
			// and the club is moving toward the target.
			if phi := planeAngle(m, club, a0, st.Impact); math.Abs(phi) > 1e-9 {
				t.Fatalf("club angle at impact %g rad, want 0", phi)
			}
			if planeAngle(m, club, a0, st.Impact-1e-3) >= 0 || planeAngle(m, club, a0, st.Impact+1e-3) <= 0 {
				t.Fatal("club does not pass its address angle forward at impact")
			}
			// Top and transitions: the pointer angle (trunk: heading) is at
			// its backswing minimum — smaller before and after.
			for _, s := range AllSegments {
				tt := st.Transitions[s]
				ang := func(t float64) float64 {
					if m.specs[s].body {
						return heading(m, s, t)
					}
					return unwrapNear(planeAngle(m, s, a0, t), planeAngle(m, s, a0, tt))
				}
				at := ang(tt)
				for _, d := range []float64{-2e-3, 2e-3} {
					if ang(tt+d) <= at {
						t.Fatalf("%v: angle %g at %+g s from its transition is not above %g", s, ang(tt+d), d, at)
					}
				}
				if !m.specs[s].body {
					if r := st.Returns[s]; math.Abs(planeAngle(m, s, a0, r)) > 1e-9 {
						t.Fatalf("%v: angle at its return %g rad", s, planeAngle(m, s, a0, r))
					}
				}
			}
			if st.Transitions[club] != st.Top {
				t.Fatalf("club transition %g is not the top %g", st.Transitions[club], st.Top)
			}
			// Lead arm level: the upper arm's long axis is horizontal.
			for _, tt := range []float64{st.LeadArmLevelBackswing, st.LeadArmLevelDownswing} {
				p := rot.Rotate(m.Orientation(leadArm, tt), r3.Vec{Z: -1})
				if math.Abs(p.Z) > 1e-9 || !(tt > st.Takeaway && tt < st.Impact) {
					t.Fatalf("lead arm at %g s: vertical component %g", tt, p.Z)
				}
			}
			if !(st.LeadArmLevelBackswing < st.Top && st.Top < st.LeadArmLevelDownswing) {
				t.Fatal("lead arm levels not on either side of the top")
			}
			// Tempo.
			if math.Abs(st.Tempo.Ratio-c.Tempo) > 1e-12 || math.Abs(st.Tempo.DownswingS-c.Downswing) > 1e-12 ||
				math.Abs(st.Tempo.BackswingS-(st.Top-st.Takeaway)) > 1e-12 {
				t.Fatalf("tempo %+v for Tempo %g, Downswing %g", st.Tempo, c.Tempo, c.Downswing)
			}
			// Peaks: the largest |ω| on a 0.1 ms scan of the window does not
			// beat the truth, and the truth is |ω| at its time.
			for _, s := range AllSegments {
				p := st.Peaks[s]
				lo := math.Min(st.Top, st.Transitions[s])
				for tt := lo; tt <= st.Impact+PeakWindowAfterImpact; tt += 1e-4 {
					if v := deg(r3.Norm(m.Omega(s, tt))); v > p.SpeedDegPerS+1e-9 {
						t.Fatalf("%v: %g °/s at %g s beats the peak %g °/s", s, v, tt, p.SpeedDegPerS)
					}
				}
				if v := deg(r3.Norm(m.Omega(s, p.TimeS))); math.Abs(v-p.SpeedDegPerS) > 1e-9 {
					t.Fatalf("%v: peak %g °/s but |ω| at its time %g", s, p.SpeedDegPerS, v)
				}
				if v := deg(r3.Norm(m.Omega(s, st.Impact))); math.Abs(v-p.SpeedAtImpactDegPerS) > 1e-9 {
					t.Fatalf("%v: speed at impact %g, |ω| %g", s, p.SpeedAtImpactDegPerS, v)
				}
			}
			// Postures: an independent Z-Y'-X'' decomposition of the world
			// orientation in the target-line frame gives the truth.
			for s, post := range map[kinchainv1.Segment]Postures{pelvis: st.Pelvis, thorax: st.Thorax} {
				for tt, want := range map[float64]BodyAngles{st.Address: post.Address, st.Top: post.Top, st.Impact: post.Impact} {
					a, b, cc, _ := rot.Euler(rot.ZYX, frameOf(m, s, tt))
					if math.Abs(deg(a)-want.AxialRotationDeg) > 1e-7 || math.Abs(deg(b)-want.FlexionDeg) > 1e-7 ||
						math.Abs(deg(cc)-want.LateralBendDeg) > 1e-7 {
						t.Fatalf("%v at %g s: Euler %.6f %.6f %.6f, truth %+v", s, tt, deg(a), deg(b), deg(cc), want)
					}
				}
			}
			if math.Abs(st.Thorax.Address.FlexionDeg-DefaultThoraxFlexion) > 1e-9 {
				t.Fatalf("thorax flexion at address %g°, want %g°", st.Thorax.Address.FlexionDeg, DefaultThoraxFlexion)
			}
			// Finish: the club is at rest from its finish on.
			if w := r3.Norm(m.Omega(club, st.Finish+1e-6)); w != 0 {
				t.Fatalf("club moves after the finish: %g rad/s", w)
			}
			if w := r3.Norm(m.Omega(club, st.Finish-0.02)); w == 0 {
				t.Fatal("club at rest before the finish")
			}
		}
	}
}

// unwrapNear returns a + 2πk nearest to ref.
func unwrapNear(a, ref float64) float64 {
	return ref + math.Remainder(a-ref, 2*math.Pi)
}

// The left-handed model is the mirror image of the right-handed one through
// the target-line frame's x–z plane: orientations map as (w, x, y, z) →
// (w, −x, y, −z), angular velocities as (x, y, z) → (−x, y, −z).
func TestLeftHandedIsMirrorImage(t *testing.T) {
	rh := newModel(t, Config{TargetHeadingDeg: 20})
	lh := newModel(t, Config{TargetHeadingDeg: 20, Handedness: kinchainv1.Handedness_HANDEDNESS_LEFT})
	if d := deg(wrapPi(lh.TargetFrameHeading() - rh.TargetFrameHeading())); math.Abs(math.Abs(d)-180) > 1e-9 {
		t.Fatalf("left-handed player faces %g° from the right-handed one, want 180°", d)
	}
	for _, s := range AllSegments {
		for _, tt := range sampleTimes(rh) {
			qr := rot.Mul(rot.YawRotation(-rh.TargetFrameHeading()), rh.Orientation(s, tt))
			ql := rot.Mul(rot.YawRotation(-lh.TargetFrameHeading()), lh.Orientation(s, tt))
			want := quat.Number{Real: qr.Real, Imag: -qr.Imag, Jmag: qr.Jmag, Kmag: -qr.Kmag}
			if d := math.Min(quat.Abs(quat.Sub(ql, want)), quat.Abs(quat.Add(ql, want))); d > 1e-12 {
				t.Fatalf("%v at %g s: left-handed orientation is not the mirror image", s, tt)
			}
			wr := rot.Rotate(rot.YawRotation(-rh.TargetFrameHeading()), rh.Omega(s, tt))
			wl := rot.Rotate(rot.YawRotation(-lh.TargetFrameHeading()), lh.Omega(s, tt))
			if r3.Norm(r3.Sub(wl, r3.Vec{X: -wr.X, Y: wr.Y, Z: -wr.Z})) > 1e-9 {
				t.Fatalf("%v at %g s: left-handed ω is not the mirror image", s, tt)
			}
		}
	}
}

// The default model's peak speeds lie in the ranges the package documents
// (our invented design, common practice, no source), in proximal-to-distal
// order.
func TestDefaultPeaksInDocumentedRanges(t *testing.T) {
	_, tr, err := Generate(Config{})
	if err != nil {
		t.Fatal(err)
	}
	st := tr.Swings[0]
	ranges := map[kinchainv1.Segment][2]float64{
		pelvis: {500, 700}, thorax: {700, 900}, leadArm: {1000, 1300}, leadHand: {1500, 2000}, club: {2000, 2600},
	}
	for s, r := range ranges {
		if v := st.Peaks[s].SpeedDegPerS; v < r[0] || v > r[1] {
			t.Errorf("%v peaks at %.0f °/s, outside %v", s, v, r)
		}
	}
	if !st.ProximalToDistal {
		t.Errorf("default model not proximal to distal: %v", st.PeakOrder)
	}
}
