package swing

import (
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/num/quat"
	"gonum.org/v1/gonum/spatial/r3"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/rot"
	"github.com/kinchain/kinchain/internal/synth"
)

func randRot(r *rand.Rand) quat.Number {
	q, _ := rot.Normalize(quat.Number{Real: r.NormFloat64(), Imag: r.NormFloat64(), Jmag: r.NormFloat64(), Kmag: r.NormFloat64()})
	return q
}

// Mirror is the matrix reflection R' = M R M, M = diag(1, −1, 1), computed
// here with explicit 3×3 products (rot.Matrix, checked against gonum).
func TestMirrorIsReflection(t *testing.T) {
	r := rand.New(rand.NewPCG(1, 2))
	for i := 0; i < 200; i++ {
		q := randRot(r)
		m := rot.Matrix(q)
		var want [3][3]float64
		sign := [3]float64{1, -1, 1}
		for a := 0; a < 3; a++ {
			for b := 0; b < 3; b++ {
				want[a][b] = sign[a] * m[a][b] * sign[b]
			}
		}
		got := rot.Matrix(Mirror(q))
		for a := 0; a < 3; a++ {
			for b := 0; b < 3; b++ {
				if math.Abs(got[a][b]-want[a][b]) > 1e-12 {
					t.Fatalf("Mirror(%v) matrix %v, want M R M %v", q, got, want)
				}
			}
		}
	}
	// Angular velocity: the derivative of the mirrored motion. For
	// q(t) = exp(ωt/2)·q0, the mirror's angular velocity is the central
	// difference of Mirror(q(t)).
	for i := 0; i < 50; i++ {
		q0 := randRot(r)
		w := r3.Vec{X: r.NormFloat64(), Y: r.NormFloat64(), Z: r.NormFloat64()}
		const h = 1e-6
		qp := Mirror(rot.Mul(rot.FromRotVec(r3.Scale(h, w)), q0))
		qm := Mirror(rot.Mul(rot.FromRotVec(r3.Scale(-h, w)), q0))
		num := r3.Scale(1/(2*h), rot.ToRotVec(rot.Mul(qp, rot.Conj(qm))))
		if d := r3.Norm(r3.Sub(num, MirrorAngularVelocity(w))); d > 1e-6 {
			t.Fatalf("mirrored ω %v, difference %v", MirrorAngularVelocity(w), num)
		}
	}
}

// The in-plane rate equals the derivative of the in-plane angle (central
// difference) for random motions; the angle is 0 at the address pointer.
func TestPlaneRateIsAngleDerivative(t *testing.T) {
	r := rand.New(rand.NewPCG(3, 4))
	for i := 0; i < 200; i++ {
		seg := []kinchainv1.Segment{pelvis, clubSeg}[i%2]
		q0 := randRot(r)
		ax := PointerAxis(seg)
		pl, ok := planeFor(seg, rot.Rotate(q0, ax))
		if !ok {
			continue
		}
		if a := pl.angle(rot.Rotate(q0, ax)); math.Abs(a) > 1e-12 {
			t.Fatalf("angle at address %g", a)
		}
		q := randRot(r)
		w := r3.Vec{X: r.NormFloat64(), Y: r.NormFloat64(), Z: r.NormFloat64()}
		const h = 1e-6
		at := func(s float64) float64 { return pl.angle(rot.Rotate(rot.Mul(rot.FromRotVec(r3.Scale(s, w)), q), ax)) }
		num := wrapPi(at(h)-at(-h)) / (2 * h)
		if got := pl.rate(rot.Rotate(q, ax), w); math.Abs(got-num) > 1e-5*(1+math.Abs(num)) {
			t.Fatalf("rate %g, angle difference %g", got, num)
		}
	}
}

// The target is +y_T for a right-handed player and −y_T for a left-handed
// one.
func TestHeadingFromTarget(t *testing.T) {
	for _, target := range []float64{0, 1, -2.5} {
		for _, left := range []bool{false, true} {
			f := newFrame(headingFromTarget(target, left), left)
			y := rot.Rotate(rot.Conj(f.toT), r3.Vec{Y: 1}) // y_T in the world
			toward := r3.Vec{X: math.Cos(target), Y: math.Sin(target)}
			want := 1.0
			if left {
				want = -1
			}
			if d := r3.Dot(y, toward); math.Abs(d-want) > 1e-12 {
				t.Fatalf("target %g left %v: y_T·target %g", target, left, d)
			}
		}
	}
}

// mirrorCapture returns the mirror image of a capture through the vertical
// plane containing the x axis of heading psi (rad), as a left-handed
// capture.
func mirrorCapture(c *kinchainv1.Capture, psi float64) *kinchainv1.Capture {
	out := &kinchainv1.Capture{CaptureId: c.CaptureId, Handedness: kinchainv1.Handedness_HANDEDNESS_LEFT}
	yaw, unyaw := rot.YawRotation(psi), rot.YawRotation(-psi)
	for _, tk := range c.Tracks {
		m := &kinchainv1.Track{Segment: tk.Segment, TimeS: tk.TimeS}
		for i := range tk.TimeS {
			q := quat.Number{Real: tk.Qw[i], Imag: tk.Qx[i], Jmag: tk.Qy[i], Kmag: tk.Qz[i]}
			q = rot.Mul(yaw, Mirror(rot.Mul(unyaw, q)))
			m.Qw, m.Qx, m.Qy, m.Qz = append(m.Qw, q.Real), append(m.Qx, q.Imag), append(m.Qy, q.Jmag), append(m.Qz, q.Kmag)
		}
		out.Tracks = append(out.Tracks, m)
	}
	return out
}

// sameReport fails unless a and b agree: events, transitions, the
// sequence, gains and tempo within tol (s, and relative for speeds).
func sameReport(t *testing.T, a, b *kinchainv1.SwingReport, tol float64) {
	t.Helper()
	if len(a.Events) != len(b.Events) || len(a.Transitions) != len(b.Transitions) || len(a.Sequence) != len(b.Sequence) ||
		len(a.Gains) != len(b.Gains) || a.ProximalToDistal != b.ProximalToDistal {
		t.Fatalf("reports differ in shape:\n%v\n%v", a, b)
	}
	for i := range a.Events {
		if a.Events[i].Kind != b.Events[i].Kind {
			t.Fatalf("event %d: %v vs %v", i, a.Events[i].Kind, b.Events[i].Kind)
		}
		closeTo(t, a.Events[i].Kind.String(), b.Events[i].TimeS, a.Events[i].TimeS, tol)
	}
	for i := range a.Transitions {
		closeTo(t, "transition", b.Transitions[i].TimeS, a.Transitions[i].TimeS, tol)
	}
	for i := range a.Sequence {
		x, y := a.Sequence[i], b.Sequence[i]
		closeTo(t, "peak", y.PeakSpeedDegPerS, x.PeakSpeedDegPerS, tol*x.PeakSpeedDegPerS)
		closeTo(t, "peak time", y.PeakTimeS, x.PeakTimeS, tol)
		closeTo(t, "at impact", y.SpeedAtImpactDegPerS, x.SpeedAtImpactDegPerS, tol*x.PeakSpeedDegPerS)
	}
	for i := range a.Gains {
		closeTo(t, "gain", b.Gains[i].Ratio, a.Gains[i].Ratio, tol)
	}
	closeTo(t, "tempo", b.Tempo.Ratio, a.Tempo.Ratio, tol)
	for i := range a.Postures {
		pa, pb := a.Postures[i], b.Postures[i]
		closeTo(t, "pelvis axial", pb.GetPelvis().GetAxialRotationDeg(), pa.GetPelvis().GetAxialRotationDeg(), 1e-4)
		closeTo(t, "thorax lateral bend", pb.GetThorax().GetLateralBendDeg(), pa.GetThorax().GetLateralBendDeg(), 1e-4)
		closeTo(t, "lead arm elevation", pb.GetLeadArm().GetElevationDeg(), pa.GetLeadArm().GetElevationDeg(), 1e-4)
		closeTo(t, "club shaft plane", pb.GetClub().GetShaftPlaneDeg(), pa.GetClub().GetShaftPlaneDeg(), 1e-4)
	}
}

// Mirror identity: the left-handed mirror image of a capture gives the same
// report as the capture itself, whether the mirror is made here from the
// right-handed samples or by the model.
func TestMirrorIdentity(t *testing.T) {
	cfg := synth.Config{TargetHeadingDeg: 57, Waggles: 1}
	c, tr := generate(t, cfg)
	_, right, _ := pipeline(t, c, noFilter())
	_, left, _ := pipeline(t, mirrorCapture(c, rad(tr.TargetFrameHeadingDeg)), noFilter())
	if len(right) != 1 || len(left) != 1 {
		t.Fatalf("%d and %d swings", len(right), len(left))
	}
	sameReport(t, right[0], left[0], 1e-6)
	closeTo(t, "heading", left[0].TargetFrameHeadingDeg, right[0].TargetFrameHeadingDeg, 1e-6)

	cfg.Handedness = kinchainv1.Handedness_HANDEDNESS_LEFT
	c2, tr2 := generate(t, cfg)
	_, model, _ := pipeline(t, c2, noFilter())
	sameReport(t, right[0], model[0], 1e-6)
	closeTo(t, "left-handed heading", model[0].TargetFrameHeadingDeg, tr2.TargetFrameHeadingDeg, 1e-6)
}

// A recorded target heading sets the frame (no pelvis needed for it) and
// gives the same report as the pelvis-derived frame of the model.
func TestTargetHeadingOverride(t *testing.T) {
	c, tr := generate(t, synth.Config{TargetHeadingDeg: -100, RecordTargetHeading: true,
		Segments: []kinchainv1.Segment{thorax, leadArm, clubSeg}})
	_, withHeading, _ := pipeline(t, c, noFilter())
	c.TargetHeadingDeg = nil
	_, derived, _ := pipeline(t, c, noFilter())
	sameReport(t, withHeading[0], derived[0], 1e-6)
	closeTo(t, "heading", withHeading[0].TargetFrameHeadingDeg, tr.TargetFrameHeadingDeg, 1e-9)
}

// Postures are wired: one per event, with its kind and time, and the trunk
// angles at address, top and impact equal the model's (Z-Y'-X” Cardan
// angles in the target-line frame, truth by construction), for both
// handednesses.
func TestPosturesAtEvents(t *testing.T) {
	for _, h := range []kinchainv1.Handedness{kinchainv1.Handedness_HANDEDNESS_RIGHT, kinchainv1.Handedness_HANDEDNESS_LEFT} {
		c, tr := generate(t, synth.Config{Handedness: h, TargetHeadingDeg: 200})
		_, reps, _ := pipeline(t, c, noFilter())
		r, st := reps[0], tr.Swings[0]
		if len(r.Postures) != len(r.Events) {
			t.Fatalf("%d postures for %d events", len(r.Postures), len(r.Events))
		}
		for i, p := range r.Postures {
			if p.Event != r.Events[i].Kind || p.TimeS != r.Events[i].TimeS {
				t.Fatalf("posture %d is %v at %g, event %v at %g", i, p.Event, p.TimeS, r.Events[i].Kind, r.Events[i].TimeS)
			}
			var want synth.BodyAngles
			var wantT synth.BodyAngles
			switch p.Event {
			case evAddress:
				want, wantT = st.Pelvis.Address, st.Thorax.Address
			case evTop:
				want, wantT = st.Pelvis.Top, st.Thorax.Top
			case evImpact:
				want, wantT = st.Pelvis.Impact, st.Thorax.Impact
			default:
				continue
			}
			for _, x := range []struct {
				name      string
				got, want float64
			}{
				{"pelvis axial", p.Pelvis.AxialRotationDeg, want.AxialRotationDeg},
				{"pelvis flexion", p.Pelvis.FlexionDeg, want.FlexionDeg},
				{"pelvis lateral bend", p.Pelvis.LateralBendDeg, want.LateralBendDeg},
				{"thorax axial", p.Thorax.AxialRotationDeg, wantT.AxialRotationDeg},
				{"thorax flexion", p.Thorax.FlexionDeg, wantT.FlexionDeg},
				{"thorax lateral bend", p.Thorax.LateralBendDeg, wantT.LateralBendDeg},
			} {
				closeTo(t, p.Event.String()+" "+x.name, x.got, x.want, 0.05)
			}
		}
	}
}

// The fast pointer and ω of the frame equal the quaternion route: rotate
// the axis by Mirror(Yaw(−heading) ⊗ q), and rotate then mirror ω.
func TestFramePointerMatchesQuaternion(t *testing.T) {
	r := rand.New(rand.NewPCG(7, 8))
	for i := 0; i < 200; i++ {
		f := newFrame(r.Float64()*6-3, i%2 == 1)
		q := randRot(r)
		for _, s := range []kinchainv1.Segment{pelvis, clubSeg} {
			want := rot.Rotate(f.orientation(q), PointerAxis(s))
			if d := r3.Norm(r3.Sub(f.pointer(s, q), want)); d > 1e-12 {
				t.Fatalf("pointer off by %g", d)
			}
		}
		w := r3.Vec{X: r.NormFloat64(), Y: r.NormFloat64(), Z: r.NormFloat64()}
		want := rot.Rotate(f.toT, w)
		if f.mirror {
			want = MirrorAngularVelocity(want)
		}
		if d := r3.Norm(r3.Sub(f.omega(w), want)); d > 1e-12 {
			t.Fatalf("ω off by %g", d)
		}
	}
}
