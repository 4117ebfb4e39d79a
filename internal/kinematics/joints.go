package kinematics

import (
	"math"

	"gonum.org/v1/gonum/num/quat"
	"gonum.org/v1/gonum/spatial/r3"

	"github.com/kinchain/kinchain/internal/rot"
)

// Joint angles between two segment frames. Every function takes the
// orientations of a proximal (reference) frame p and a distal frame d, both
// rotating their frame into one common frame, and decomposes the relative
// rotation p* ⊗ d (d expressed in p) into an intrinsic angle sequence.
//
// Our segment axes are x anterior, y to the segment's left, z superior, and
// every segment frame equals the world frame in the neutral pose (upright,
// facing +x, arms hanging, palms toward the thighs). The ISB frames of Wu et
// al. (2002, J Biomech 35:543–548; 2005, J Biomech 38:981–992) are defined for
// the right side with X anterior, Y superior (the long axis, pointing
// proximally) and Z to the right, so that on the right side
//
//	ISB X = our +x,  ISB Y = our +z,  ISB Z = our −y.
//
// Left-side limbs are reflected through the sagittal plane (y → −y) first,
// which turns a left limb into the equivalent right limb: every ISB angle then
// keeps its anatomical meaning (internal rotation, flexion, … positive on
// both sides). For a quaternion the reflection is (w, x, y, z) → (w, −x, y, −z).
// DEVELOPERS.md (joint angles and posture) has the full tables.

// GimbalLockMargin is how close, in rad, the middle angle of a sequence may
// come to its singular value before the angles are flagged NearGimbalLock:
// 10°, the margin the API documents for the humerothoracic elevation.
const GimbalLockMargin = 10 * math.Pi / 180

// Side selects the body side of a limb. The zero value is the left side, the
// lead side of a right-handed player and therefore of every capture after
// left-handed captures have been mirrored.
type Side int

const (
	// SideLeft is the left side.
	SideLeft Side = iota
	// SideRight is the right side.
	SideRight
)

// Elementary intrinsic sequences on our axes used below (rot has the common
// ones).
var (
	seqZXZ = rot.Sequence{rot.Z, rot.X, rot.Z}
	seqYXZ = rot.Sequence{rot.Y, rot.X, rot.Z}
)

// relative returns p* ⊗ d, the orientation of frame d expressed in frame p.
func relative(p, d quat.Number) quat.Number {
	return rot.Mul(rot.Conj(p), d)
}

// mirrorSagittal returns M R M for M = diag(1, −1, 1), the reflection through
// the x–z plane: a rotation about y keeps its angle, rotations about x and z
// change sign. In quaternion form (w, x, y, z) → (w, −x, y, −z).
func mirrorSagittal(q quat.Number) quat.Number {
	return quat.Number{Real: q.Real, Imag: -q.Imag, Jmag: q.Jmag, Kmag: -q.Kmag}
}

// onSide returns the relative rotation p* ⊗ d of a limb, reflected to the
// right side when side is SideLeft.
func onSide(p, d quat.Number, side Side) quat.Number {
	q := relative(p, d)
	if side == SideLeft {
		q = mirrorSagittal(q)
	}
	return q
}

// wrapPi maps an angle to (−π, π].
func wrapPi(x float64) float64 {
	x = math.Mod(x, 2*math.Pi)
	switch {
	case x > math.Pi:
		x -= 2 * math.Pi
	case x <= -math.Pi:
		x += 2 * math.Pi
	}
	return x
}

// BodyAngles are the orientation of a trunk segment relative to a reference
// frame, in rad.
type BodyAngles struct {
	// AxialRotation is the turn about the reference's vertical; positive
	// turns the segment's front toward +y (the target, for the target-line
	// frame of a right-handed player).
	AxialRotation float64
	// Flexion is the tilt about the once-rotated y axis; positive bends
	// forward (the segment's z axis toward its x axis).
	Flexion float64
	// LateralBend is the tilt about the segment's own x axis; positive tilts
	// toward −y (the right, which is the trail side of a right-handed player).
	LateralBend float64
	// NearGimbalLock reports the middle angle within GimbalLockMargin of its
	// singular value; at the singular value itself the third angle is 0 and
	// the first carries the whole rotation about the shared axis.
	NearGimbalLock bool
}

// BodyAnglesOf returns the intrinsic Z-Y′-X″ Cardan angles of frame seg
// relative to frame ref: p* ⊗ d = Rz(axial) · Ry(flexion) · Rx(lateral bend),
// each angle by the right-hand rule about our axes (rad; axial and lateral in
// (−π, π], flexion in [−π/2, π/2]). With x anterior, y left and z up, a
// right-hand rotation about +y tilts z toward +x (forward) and one about +x
// tilts z toward −y (the right); the signs therefore read: axial positive
// toward +y, flexion positive forward, lateral bend positive to the right.
//
// This is the sequence the product fixes for Posture.pelvis, .thorax and
// .separation (target-line frame or pelvis as reference). It differs from the
// ISB trunk sequence of Wu et al. (2002), which takes flexion first; see
// BodyAnglesISB.
//
// Flexion at ±90° is gimbal lock: lateral bend is then set to 0 and the
// axial rotation carries the combined rotation (rot.Euler's convention, the
// same as scipy's as_euler).
func BodyAnglesOf(ref, seg quat.Number) BodyAngles {
	a, b, c, _ := rot.Euler(rot.ZYX, relative(ref, seg))
	return BodyAngles{
		AxialRotation:  a,
		Flexion:        b,
		LateralBend:    c,
		NearGimbalLock: math.Pi/2-math.Abs(b) < GimbalLockMargin,
	}
}

// BodyAnglesISB returns the trunk angles of frame seg relative to frame ref
// in the sequence of the ISB spine joint coordinate system (Wu et al. 2002,
// J Biomech 35:543–548): flexion/extension about the reference's
// mediolateral axis (ISB Z), then lateral bending about the floating axis
// (ISB X′), then axial rotation about the segment's long axis (ISB Y″). On
// our axes ISB Z = −y, X = +x, Y = +z, so
//
//	p* ⊗ d = R−y(α) Rx(β) Rz(γ) = Ry(−α) · Rx(β) · Rz(γ),
//
// the intrinsic Y-X′-Z″ sequence on our axes. The right-hand rule about ISB
// +Z (pointing right) makes a forward bend of a segment above its joint
// negative; the result is reported with the same signs as BodyAnglesOf
// (flexion = −α positive forward, lateral bend = β positive to the right,
// axial rotation = γ positive to the left) so the two sequences can be
// compared directly. They agree for single-plane motion and differ when
// several rotations combine. Gimbal lock is at lateral bend ±90°.
func BodyAnglesISB(ref, seg quat.Number) BodyAngles {
	a, b, c, _ := rot.Euler(seqYXZ, relative(ref, seg))
	return BodyAngles{
		Flexion:        a,
		LateralBend:    b,
		AxialRotation:  c,
		NearGimbalLock: math.Pi/2-math.Abs(b) < GimbalLockMargin,
	}
}

// ArmAngles are the humerothoracic angles of Wu et al. (2005), in rad.
type ArmAngles struct {
	// PlaneOfElevation is the plane in which the humerus is elevated: 0 the
	// abduction (frontal) plane, π/2 the forward-flexion plane; (−π, π].
	PlaneOfElevation float64
	// Elevation is the angle between the humerus and the thorax's long axis,
	// [0, π].
	Elevation float64
	// AxialRotation is the rotation about the humerus' long axis, positive
	// internal; (−π, π].
	AxialRotation float64
	// NearGimbalLock reports the elevation within GimbalLockMargin of 0 or π,
	// where the plane of elevation and axial rotation are ill-defined.
	NearGimbalLock bool
}

// HumerothoracicAngles returns the humerus orientation relative to the
// thorax by the ISB Y-X′-Y″ sequence (Wu et al. 2005, J Biomech 38:981–992,
// humerothoracic joint): R = RY(plane of elevation) · RX(−elevation) ·
// RY(axial rotation) with ISB Y the thorax's (then the humerus') long axis and
// X the anterior axis. On our axes ISB Y = +z and X = +x, so the sequence is
// Z-X′-Z″ on our axes after the left arm has been reflected to the right
// (see the axes table at the top of this file). Plane 0 is abduction, π/2 forward flexion;
// elevation is in [0, π]; axial rotation positive internal.
//
// rot.Euler returns the Z-X′-Z″ solution with the middle angle b ∈ [0, π];
// the ISB middle angle is −elevation, so the solution used is
// (a + π, −b, c − π): plane = a + π, elevation = b, axial = c − π.
//
// Gimbal lock: at elevation 0 or π only the sum (or difference) of plane and
// axial rotation is defined. When the decomposition is singular (middle angle
// within 1e-7 rad of 0 or π) the plane of elevation is set to 0 and the whole
// rotation about the long axis is reported as axial rotation. NearGimbalLock
// is set for elevations within GimbalLockMargin (10°) of 0 or π, where the
// values are defined but sensitive to noise.
func HumerothoracicAngles(thorax, humerus quat.Number, side Side) ArmAngles {
	a, b, c, locked := rot.Euler(seqZXZ, onSide(thorax, humerus, side))
	out := ArmAngles{
		Elevation:      b,
		NearGimbalLock: b < GimbalLockMargin || math.Pi-b < GimbalLockMargin,
	}
	switch {
	case locked && b < math.Pi/2:
		// Rz(a): all of it about the long axis.
		out.AxialRotation = wrapPi(a)
	case locked:
		// Rz(a) Rx(π) = Rz(0) Rx(−π) Rz(−a).
		out.AxialRotation = wrapPi(-a)
	default:
		out.PlaneOfElevation = wrapPi(a + math.Pi)
		out.AxialRotation = wrapPi(c - math.Pi)
	}
	return out
}

// WristAngles are the hand relative to the forearm (Wu et al. 2005), in rad.
type WristAngles struct {
	// Flexion is positive palmar, negative dorsal (extension).
	Flexion float64
	// RadialDeviation is positive toward the thumb side, negative ulnar.
	RadialDeviation float64
	// Rotation is the small residual rotation about the hand's long axis,
	// positive in the pronation direction.
	Rotation float64
	// NearGimbalLock reports the deviation within GimbalLockMargin of ±90°.
	NearGimbalLock bool
}

// WristAnglesOf returns the hand orientation relative to the forearm by the
// ISB wrist joint coordinate system (Wu et al. 2005, J Biomech 38:981–992):
// flexion/extension about the forearm's Z axis (radial), then deviation about
// the floating X′ axis (volar), then rotation about the hand's Y″ axis
// (proximal). In our neutral pose the palm faces the thigh and the thumb
// points forward, so for the right hand ISB X (volar) = our +y, Y (proximal)
// = our +z, Z (radial) = our +x: the ISB Z-X′-Y″ sequence is X-Y′-Z″ on our
// axes after the left hand has been reflected to the right. By the right-hand
// rule about ISB Z flexion is positive (as ISB reports it); about ISB X
// ulnar deviation is positive, so RadialDeviation is the negated second angle.
// Gimbal lock (deviation ±90°) lies far outside the wrist's range; the
// convention there is rot.Euler's (third angle 0).
func WristAnglesOf(forearm, hand quat.Number, side Side) WristAngles {
	a, b, c, _ := rot.Euler(rot.XYZ, onSide(forearm, hand, side))
	return WristAngles{
		Flexion:         a,
		RadialDeviation: -b,
		Rotation:        c,
		NearGimbalLock:  math.Pi/2-math.Abs(b) < GimbalLockMargin,
	}
}

// ElbowAngles are the forearm relative to the upper arm (Wu et al. 2005),
// in rad.
type ElbowAngles struct {
	// Flexion is positive flexion, negative hyperextension.
	Flexion float64
	// CarryingAngle is positive valgus (the distal forearm away from the
	// body's midline).
	CarryingAngle float64
	// Pronation is positive pronation, negative supination, zero with the
	// palm facing the thigh (our neutral pose; see ElbowAnglesOf).
	Pronation float64
}

// ElbowAnglesOf returns the forearm orientation relative to the upper arm by
// the ISB elbow joint coordinate system (Wu et al. 2005, J Biomech
// 38:981–992): flexion about the humerus' Z axis, then the carrying angle
// about the floating X′ axis, then pronation/supination about the forearm's
// Y″ axis. With both segments on our axes (ISB X = +x, Y = +z, Z = −y on the
// right side) this is R−y(α) Rx(β) Rz(γ) = Ry(−α) · Rx(β) · Rz(γ), the
// intrinsic Y-X′-Z″ sequence on our axes, after reflecting a left arm to
// the right. Flexion = α (the first angle negated), valgus = −β (the
// right-hand rule about ISB X gives varus positive), pronation = γ.
//
// Zero pronation is our neutral pose, palm toward the thigh (the clinical
// mid-position). The ISB forearm axes are defined with the palm facing
// forward (anatomical position, fully supinated); ISB pronation is therefore
// this value plus π/2.
func ElbowAnglesOf(upperArm, forearm quat.Number, side Side) ElbowAngles {
	a, b, c, _ := rot.Euler(seqYXZ, onSide(upperArm, forearm, side))
	return ElbowAngles{Flexion: -a, CarryingAngle: -b, Pronation: c}
}

// ClubAngles describe the shaft in a reference frame whose x axis is the
// player's horizontal facing direction, y points toward the target and z up
// (the target-line frame), in rad.
type ClubAngles struct {
	// ShaftLean is the angle of the shaft from vertical in the y–z plane,
	// positive with the grip toward +y (ahead of the head); (−π, π].
	ShaftLean float64
	// ShaftPlane is the angle of the shaft above the ground (x–y) plane,
	// positive with the grip above the head; [−π/2, π/2].
	ShaftPlane float64
}

// ClubAnglesOf returns the shaft angles of a club whose orientation club is
// expressed in the target-line frame. The club frame's z axis points along
// the shaft from the head to the grip; s = club ⊗ ẑ ⊗ club* is that
// direction in the target-line frame, and
//
//	ShaftLean  = atan2(s_y, s_z)   (projection onto the y–z plane)
//	ShaftPlane = asin(s_z)
//
// (common practice, no source: face-on shaft lean and the shaft's
// inclination). A shaft along ±x has no y–z projection and reads lean 0.
func ClubAnglesOf(club quat.Number) ClubAngles {
	s := rot.Rotate(club, r3.Vec{Z: 1})
	z := math.Max(-1, math.Min(1, s.Z))
	return ClubAngles{ShaftLean: math.Atan2(s.Y, s.Z), ShaftPlane: math.Asin(z)}
}
