package swing

import (
	"math"
	"testing"

	"gonum.org/v1/gonum/num/quat"
	"gonum.org/v1/gonum/spatial/r3"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/bvh/bvhtest"
	"github.com/kinchain/kinchain/internal/rot"
)

const degToRad = math.Pi / 180

func postureSegments(m map[kinchainv1.Segment]quat.Number) func(kinchainv1.Segment) (quat.Number, bool) {
	return func(s kinchainv1.Segment) (quat.Number, bool) {
		q, ok := m[s]
		return q, ok
	}
}

func checkNear(t *testing.T, what string, got, want, tol float64) {
	t.Helper()
	if math.Abs(got-want) > tol {
		t.Errorf("%s = %.9g, want %.9g", what, got, want)
	}
}

// Constructed orientations with known angles: each part of the posture reads
// back the rotation it was built from, in degrees, relative to the right
// reference (target-line frame, pelvis, thorax, forearm, upper arm).
func TestPostureAtConstructed(t *testing.T) {
	pelvis := rot.FromEuler(rot.ZYX, -30*degToRad, 20*degToRad, 4*degToRad)
	thorax := rot.Mul(pelvis, rot.FromEuler(rot.ZYX, -25*degToRad, 10*degToRad, -6*degToRad))
	// Lead (left) upper arm abducted 90° in the thorax's frontal plane and
	// internally rotated 30°: axes x = (cos 30°, 0, −sin 30°), z = −y in
	// the thorax frame (see kinematics' closed-form tests).
	s30, c30 := math.Sincos(30 * degToRad)
	ax, az := r3.Vec{X: c30, Z: -s30}, r3.Vec{Y: -1}
	ay := r3.Cross(az, ax)
	abducted := rot.FromMatrix([3][3]float64{{ax.X, ay.X, az.X}, {ax.Y, ay.Y, az.Y}, {ax.Z, ay.Z, az.Z}})
	upper := rot.Mul(thorax, abducted)
	// Lead forearm pronated 50° about its long axis (left forearm: −z turn)
	// and the hand flexed 40° toward the palm (left hand: −x turn).
	forearm := rot.Mul(upper, rot.FromAxisAngle(r3.Vec{Z: 1}, -50*degToRad))
	hand := rot.Mul(forearm, rot.FromAxisAngle(r3.Vec{X: 1}, -40*degToRad))
	// Shaft (head → grip) leaning 10° toward the target from vertical.
	club := rot.FromAxisAngle(r3.Vec{X: 1}, -10*degToRad)

	p := PostureAt(postureSegments(map[kinchainv1.Segment]quat.Number{
		kinchainv1.Segment_SEGMENT_PELVIS:         pelvis,
		kinchainv1.Segment_SEGMENT_THORAX:         thorax,
		kinchainv1.Segment_SEGMENT_LEAD_UPPER_ARM: upper,
		kinchainv1.Segment_SEGMENT_LEAD_FOREARM:   forearm,
		kinchainv1.Segment_SEGMENT_LEAD_HAND:      hand,
		kinchainv1.Segment_SEGMENT_CLUB:           club,
	}))
	const tol = 1e-9
	checkNear(t, "pelvis axial", p.GetPelvis().GetAxialRotationDeg(), -30, tol)
	checkNear(t, "pelvis flexion", p.GetPelvis().GetFlexionDeg(), 20, tol)
	checkNear(t, "pelvis lateral", p.GetPelvis().GetLateralBendDeg(), 4, tol)
	checkNear(t, "separation axial", p.GetSeparation().GetAxialRotationDeg(), -25, tol)
	checkNear(t, "separation flexion", p.GetSeparation().GetFlexionDeg(), 10, tol)
	checkNear(t, "separation lateral", p.GetSeparation().GetLateralBendDeg(), -6, tol)
	if p.Thorax == nil {
		t.Fatal("no thorax angles")
	}
	checkNear(t, "lead arm plane", p.GetLeadArm().GetElevationPlaneDeg(), 0, 1e-7)
	checkNear(t, "lead arm elevation", p.GetLeadArm().GetElevationDeg(), 90, 1e-7)
	checkNear(t, "lead arm axial", p.GetLeadArm().GetAxialRotationDeg(), 30, 1e-7)
	if p.GetLeadArm().GetNearGimbalLock() {
		t.Error("abducted arm flagged near gimbal lock")
	}
	checkNear(t, "wrist flexion", p.GetLeadWrist().GetFlexionDeg(), 40, tol)
	checkNear(t, "wrist radial", p.GetLeadWrist().GetRadialDeviationDeg(), 0, tol)
	if p.GetLeadWrist().PronationDeg == nil {
		t.Fatal("no pronation with the upper arm present")
	}
	checkNear(t, "pronation", p.GetLeadWrist().GetPronationDeg(), 50, tol)
	checkNear(t, "shaft lean", p.GetClub().GetShaftLeanDeg(), 10, tol)
	checkNear(t, "shaft plane", p.GetClub().GetShaftPlaneDeg(), 80, tol)
	if p.Event != kinchainv1.EventKind_EVENT_KIND_UNSPECIFIED || p.TimeS != 0 {
		t.Errorf("event fields set: %v %g", p.Event, p.TimeS)
	}
}

// Each part is present only when its segments are.
func TestPostureAtPresence(t *testing.T) {
	id := rot.Identity
	p := PostureAt(postureSegments(map[kinchainv1.Segment]quat.Number{kinchainv1.Segment_SEGMENT_PELVIS: id}))
	if p.Pelvis == nil || p.Thorax != nil || p.Separation != nil || p.LeadArm != nil || p.LeadWrist != nil || p.Club != nil {
		t.Errorf("pelvis only: %v", p)
	}
	p = PostureAt(postureSegments(map[kinchainv1.Segment]quat.Number{
		kinchainv1.Segment_SEGMENT_LEAD_UPPER_ARM: id,
		kinchainv1.Segment_SEGMENT_LEAD_FOREARM:   id,
		kinchainv1.Segment_SEGMENT_LEAD_HAND:      id,
	}))
	if p.LeadArm != nil || p.LeadWrist == nil || p.LeadWrist.PronationDeg == nil || p.Pelvis != nil {
		t.Errorf("arm without thorax: %v", p)
	}
	p = PostureAt(postureSegments(map[kinchainv1.Segment]quat.Number{
		kinchainv1.Segment_SEGMENT_THORAX:       id,
		kinchainv1.Segment_SEGMENT_LEAD_FOREARM: id,
		kinchainv1.Segment_SEGMENT_LEAD_HAND:    id,
	}))
	if p.LeadWrist == nil || p.LeadWrist.PronationDeg != nil || p.LeadArm != nil || p.Separation != nil {
		t.Errorf("wrist without upper arm: %v", p)
	}
	// The hanging arm (elevation 0°) is at gimbal lock: flagged, plane 0.
	p = PostureAt(postureSegments(map[kinchainv1.Segment]quat.Number{
		kinchainv1.Segment_SEGMENT_THORAX:         id,
		kinchainv1.Segment_SEGMENT_LEAD_UPPER_ARM: id,
	}))
	if !p.GetLeadArm().GetNearGimbalLock() || p.GetLeadArm().GetElevationPlaneDeg() != 0 || p.GetLeadArm().GetElevationDeg() != 0 {
		t.Errorf("hanging arm: %v", p.GetLeadArm())
	}
	if p := PostureAt(postureSegments(nil)); p.Pelvis != nil || p.Club != nil {
		t.Errorf("no segments: %v", p)
	}
}

// Real motion: the CMU golf swings (open dataset, /work/shared/data/cmu-golf,
// a right-handed subject). The target-line frame is the pelvis heading at
// address (the first motion frame). The checks are facts of the trade
// (common practice, no source), with generous bounds: at address the trunk
// is tilted forward, thorax and pelvis face the same way and the lead arm
// hangs; at the top of the backswing (taken here as the most negative
// thorax axial rotation) both have turned away from the target, the thorax
// further than the pelvis, the lead arm is raised and across the chest
// (plane of elevation past 90°) and the lead wrist has hinged toward the
// thumb; at the finish the thorax faces past the target.
func TestPostureCMU(t *testing.T) {
	for _, trial := range bvhtest.Trials {
		c := bvhtest.Capture(t, trial)
		tracks := map[kinchainv1.Segment]*kinchainv1.Track{}
		for _, tr := range c.Tracks {
			tracks[tr.Segment] = tr
		}
		at := func(s kinchainv1.Segment, i int) quat.Number {
			tr := tracks[s]
			return quat.Number{Real: tr.Qw[i], Imag: tr.Qx[i], Jmag: tr.Qy[i], Kmag: tr.Qz[i]}
		}
		target := rot.YawRotation(rot.Heading(at(kinchainv1.Segment_SEGMENT_PELVIS, 0)))
		posture := func(i int) *kinchainv1.Posture {
			return PostureAt(func(s kinchainv1.Segment) (quat.Number, bool) {
				if tracks[s] == nil {
					return quat.Number{}, false
				}
				return rot.Mul(rot.Conj(target), at(s, i)), true
			})
		}
		n := len(tracks[kinchainv1.Segment_SEGMENT_PELVIS].TimeS)
		top, topAxial := 0, math.Inf(1)
		for i := 0; i < n; i++ {
			if a := posture(i).GetThorax().GetAxialRotationDeg(); a < topAxial {
				top, topAxial = i, a
			}
		}
		addr, tp, fin := posture(0), posture(top), posture(n-1)
		check := func(what string, ok bool, v ...float64) {
			if !ok {
				t.Errorf("%s: %s: %.1f", trial, what, v)
			}
		}
		check("address thorax flexion in [10°, 50°]", inRange(addr.Thorax.FlexionDeg, 10, 50), addr.Thorax.FlexionDeg)
		check("address pelvis flexion in [5°, 40°]", inRange(addr.Pelvis.FlexionDeg, 5, 40), addr.Pelvis.FlexionDeg)
		check("address separation |axial| < 15°", math.Abs(addr.Separation.AxialRotationDeg) < 15, addr.Separation.AxialRotationDeg)
		check("address lead arm elevation < 60°", addr.LeadArm.ElevationDeg < 60, addr.LeadArm.ElevationDeg)
		check("top thorax axial < −45°", tp.Thorax.AxialRotationDeg < -45, tp.Thorax.AxialRotationDeg)
		check("top pelvis turned away, less than the thorax", tp.Pelvis.AxialRotationDeg < 0 && tp.Pelvis.AxialRotationDeg > tp.Thorax.AxialRotationDeg,
			tp.Pelvis.AxialRotationDeg, tp.Thorax.AxialRotationDeg)
		check("top separation axial < 0", tp.Separation.AxialRotationDeg < 0, tp.Separation.AxialRotationDeg)
		check("top lead arm elevation > 70°", tp.LeadArm.ElevationDeg > 70, tp.LeadArm.ElevationDeg)
		check("top lead arm plane of elevation > 90°", tp.LeadArm.ElevationPlaneDeg > 90, tp.LeadArm.ElevationPlaneDeg)
		hinge := tp.LeadWrist.RadialDeviationDeg - addr.LeadWrist.RadialDeviationDeg
		check("lead wrist radial deviation gained > 20° address → top", hinge > 20, hinge)
		check("finish thorax axial > 60°", fin.Thorax.AxialRotationDeg > 60, fin.Thorax.AxialRotationDeg)
		if tp.LeadWrist.PronationDeg == nil || addr.Club != nil {
			t.Errorf("%s: pronation %v, club %v", trial, tp.LeadWrist.PronationDeg, addr.Club)
		}
	}
}

func inRange(v, lo, hi float64) bool { return v >= lo && v <= hi }
