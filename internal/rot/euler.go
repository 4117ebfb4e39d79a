package rot

import (
	"math"

	"gonum.org/v1/gonum/num/quat"
)

// Axis names a coordinate axis.
type Axis int

const (
	X Axis = iota
	Y
	Z
)

// Sequence is an intrinsic rotation sequence: rotate about First, then about
// the new Second, then about the newest Third. Tait–Bryan (Cardan) sequences
// use three different axes (e.g. Z-Y'-X”); proper Euler sequences repeat the
// first axis (e.g. Y-X'-Y”).
type Sequence [3]Axis

// Common sequences.
var (
	// ZYX is the Z-Y'-X'' Cardan sequence (yaw, pitch, roll).
	ZYX = Sequence{Z, Y, X}
	// YXY is the Y-X'-Y'' Euler sequence of the ISB humerothoracic angles.
	YXY = Sequence{Y, X, Y}
	// ZXY is the Z-X'-Y'' Cardan sequence of the ISB joint coordinate system
	// for the trunk and wrist (flexion, then lateral bend / deviation, then
	// axial rotation) expressed with ISB axes.
	ZXY = Sequence{Z, X, Y}
	// XYZ is the X-Y'-Z'' Cardan sequence.
	XYZ = Sequence{X, Y, Z}
)

func axisVec(a Axis) [3]float64 {
	var v [3]float64
	v[a] = 1
	return v
}

// FromEuler returns the rotation R = R_first(a) · R_second(b) · R_third(c) of
// the intrinsic sequence seq, angles in rad.
func FromEuler(seq Sequence, a, b, c float64) quat.Number {
	q := Identity
	for i, ang := range [3]float64{a, b, c} {
		v := axisVec(seq[i])
		s, co := math.Sincos(ang / 2)
		q = Mul(q, quat.Number{Real: co, Imag: v[0] * s, Jmag: v[1] * s, Kmag: v[2] * s})
	}
	return q
}

// Euler returns the angles (a, b, c), in rad, of the intrinsic sequence seq
// such that FromEuler(seq, a, b, c) is q.
//
// Ranges: for Cardan sequences a, c ∈ (−π, π], b ∈ [−π/2, π/2]; for proper
// Euler sequences a, c ∈ (−π, π], b ∈ [0, π]. At gimbal lock (b = ±π/2 for
// Cardan, b = 0 or π for Euler) only a sum or difference of a and c is
// defined; Euler then sets c = 0 and reports locked = true. Lock is declared
// when the middle angle is within 1e-7 rad of its singular value.
//
// The algorithm is Bernardes & Viollet, "Quaternion to Euler angles
// conversion: a direct, general and computationally efficient method", PLoS
// ONE 17(11), 2022, the method scipy.spatial.transform.Rotation.as_euler
// uses; an intrinsic sequence is computed as the reversed extrinsic one.
func Euler(seq Sequence, q quat.Number) (a, b, c float64, locked bool) {
	// Work on the extrinsic sequence (third, second, first).
	i, j, k := int(seq[2]), int(seq[1]), int(seq[0])
	proper := i == k
	if proper {
		k = 3 - i - j
	}
	sign := float64((i - j) * (j - k) * (k - i) / 2)
	v := [3]float64{q.Imag, q.Jmag, q.Kmag}
	w := q.Real
	var qa, qb, qc, qd float64
	if proper {
		qa, qb, qc, qd = w, v[i], v[j], v[k]*sign
	} else {
		qa, qb, qc, qd = w-v[j], v[i]+v[k]*sign, v[j]+w, v[k]*sign-v[i]
	}
	mid := 2 * math.Atan2(math.Hypot(qc, qd), math.Hypot(qa, qb))
	hs := math.Atan2(qb, qa)
	hd := math.Atan2(qd, qc)
	const eps = 1e-7
	var e0, e2 float64
	switch {
	case math.Abs(mid) < eps:
		e0, e2, locked = 0, 2*hs, true
	case math.Abs(mid-math.Pi) < eps:
		e0, e2, locked = 0, 2*hd, true
	default:
		e0, e2 = hs-hd, hs+hd
	}
	if !proper {
		e2 *= sign
		mid -= math.Pi / 2
	}
	// Intrinsic angles are the extrinsic ones of the reversed sequence, in
	// reverse order.
	return wrap(e2), mid, wrap(e0), locked
}

// wrap maps an angle to (−π, π].
func wrap(x float64) float64 {
	for x > math.Pi {
		x -= 2 * math.Pi
	}
	for x <= -math.Pi {
		x += 2 * math.Pi
	}
	return x
}
