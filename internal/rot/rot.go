// Package rot provides the rotation primitives kinchain is built on: unit
// quaternions in the scalar-first Hamilton convention (w, x, y, z), stored as
// gonum's quat.Number (Real = w, Imag = x, Jmag = y, Kmag = z).
//
// A quaternion q describes the orientation of a frame B in a frame A: it
// rotates vectors expressed in B into A, v_A = q ⊗ v_B ⊗ q*. For capture
// data, B is the sensor or segment frame and A the world frame.
//
// The functions here are written out by hand for speed in the per-sample
// loops; their tests check them against gonum's num/quat and spatial/r3.
package rot

import (
	"math"

	"gonum.org/v1/gonum/num/quat"
	"gonum.org/v1/gonum/spatial/r3"
)

// Identity is the rotation that leaves every vector unchanged.
var Identity = quat.Number{Real: 1}

// Mul returns the Hamilton product a ⊗ b: the rotation b followed by a when
// both rotate vectors into their parent frames (frame chaining A←B←C).
func Mul(a, b quat.Number) quat.Number {
	return quat.Number{
		Real: a.Real*b.Real - a.Imag*b.Imag - a.Jmag*b.Jmag - a.Kmag*b.Kmag,
		Imag: a.Real*b.Imag + a.Imag*b.Real + a.Jmag*b.Kmag - a.Kmag*b.Jmag,
		Jmag: a.Real*b.Jmag - a.Imag*b.Kmag + a.Jmag*b.Real + a.Kmag*b.Imag,
		Kmag: a.Real*b.Kmag + a.Imag*b.Jmag - a.Jmag*b.Imag + a.Kmag*b.Real,
	}
}

// Conj returns the conjugate q* = (w, −x, −y, −z), the inverse of a unit
// quaternion.
func Conj(q quat.Number) quat.Number {
	return quat.Number{Real: q.Real, Imag: -q.Imag, Jmag: -q.Jmag, Kmag: -q.Kmag}
}

// Dot returns the four-dimensional dot product of a and b.
func Dot(a, b quat.Number) float64 {
	return a.Real*b.Real + a.Imag*b.Imag + a.Jmag*b.Jmag + a.Kmag*b.Kmag
}

// Norm returns |q|, the Euclidean norm of the four components.
func Norm(q quat.Number) float64 {
	return math.Sqrt(Dot(q, q))
}

// Normalize returns q/|q| and |q|. Normalize of the zero quaternion returns
// the zero quaternion and 0.
func Normalize(q quat.Number) (quat.Number, float64) {
	n := Norm(q)
	if n == 0 {
		return q, 0
	}
	s := 1 / n
	return quat.Number{Real: q.Real * s, Imag: q.Imag * s, Jmag: q.Jmag * s, Kmag: q.Kmag * s}, n
}

// Neg returns −q, which represents the same rotation as q.
func Neg(q quat.Number) quat.Number {
	return quat.Number{Real: -q.Real, Imag: -q.Imag, Jmag: -q.Jmag, Kmag: -q.Kmag}
}

// Rotate returns q ⊗ v ⊗ q* for a unit quaternion q: v expressed in the
// child frame, returned in the parent frame.
func Rotate(q quat.Number, v r3.Vec) r3.Vec {
	// v' = v + 2w(u×v) + 2u×(u×v), u the vector part.
	ux, uy, uz := q.Imag, q.Jmag, q.Kmag
	tx := 2 * (uy*v.Z - uz*v.Y)
	ty := 2 * (uz*v.X - ux*v.Z)
	tz := 2 * (ux*v.Y - uy*v.X)
	return r3.Vec{
		X: v.X + q.Real*tx + (uy*tz - uz*ty),
		Y: v.Y + q.Real*ty + (uz*tx - ux*tz),
		Z: v.Z + q.Real*tz + (ux*ty - uy*tx),
	}
}

// InvRotate returns q* ⊗ v ⊗ q: v expressed in the parent frame, returned in
// the child frame.
func InvRotate(q quat.Number, v r3.Vec) r3.Vec {
	return Rotate(Conj(q), v)
}

// FromAxisAngle returns the rotation by angle (rad, right-hand rule) about
// axis. The axis need not be unit; a zero axis gives the identity.
func FromAxisAngle(axis r3.Vec, angle float64) quat.Number {
	n := r3.Norm(axis)
	if n == 0 {
		return Identity
	}
	s, c := math.Sincos(angle / 2)
	s /= n
	return quat.Number{Real: c, Imag: axis.X * s, Jmag: axis.Y * s, Kmag: axis.Z * s}
}

// FromRotVec returns exp(v/2), the rotation by |v| rad about v/|v|: the
// inverse of ToRotVec.
func FromRotVec(v r3.Vec) quat.Number {
	theta := math.Sqrt(v.X*v.X + v.Y*v.Y + v.Z*v.Z)
	if theta < 1e-8 {
		// Taylor: sin(θ/2)/θ ≈ 1/2 − θ²/48.
		k := 0.5 - theta*theta/48
		return quat.Number{Real: 1 - theta*theta/8, Imag: v.X * k, Jmag: v.Y * k, Kmag: v.Z * k}
	}
	s, c := math.Sincos(theta / 2)
	k := s / theta
	return quat.Number{Real: c, Imag: v.X * k, Jmag: v.Y * k, Kmag: v.Z * k}
}

// ToRotVec returns the rotation vector 2·log(q) of a unit quaternion: the
// axis times the angle in rad, with the angle in [0, π] (q and −q give the
// same result).
func ToRotVec(q quat.Number) r3.Vec {
	if q.Real < 0 {
		q = Neg(q)
	}
	s := math.Sqrt(q.Imag*q.Imag + q.Jmag*q.Jmag + q.Kmag*q.Kmag)
	if s < 1e-8 {
		// 2·atan2(s, w)/s ≈ 2/w for small s.
		k := 2 / q.Real
		return r3.Vec{X: q.Imag * k, Y: q.Jmag * k, Z: q.Kmag * k}
	}
	k := 2 * math.Atan2(s, q.Real) / s
	return r3.Vec{X: q.Imag * k, Y: q.Jmag * k, Z: q.Kmag * k}
}

// Angle returns the angle in rad, in [0, π], of the rotation taking a to b.
func Angle(a, b quat.Number) float64 {
	d := math.Abs(Dot(a, b))
	if d > 1 {
		d = 1
	}
	return 2 * math.Acos(d)
}

// Slerp returns the spherical linear interpolation from a (t = 0) to b
// (t = 1) along the shorter arc. The result is unit when a and b are.
func Slerp(a, b quat.Number, t float64) quat.Number {
	d := Dot(a, b)
	if d < 0 {
		b = Neg(b)
		d = -d
	}
	var wa, wb float64
	if d > 0.9995 {
		// Nearly parallel: linear interpolation, then renormalise.
		wa, wb = 1-t, t
		q := quat.Number{
			Real: wa*a.Real + wb*b.Real,
			Imag: wa*a.Imag + wb*b.Imag,
			Jmag: wa*a.Jmag + wb*b.Jmag,
			Kmag: wa*a.Kmag + wb*b.Kmag,
		}
		q, _ = Normalize(q)
		return q
	}
	theta := math.Acos(d)
	sin := math.Sin(theta)
	wa = math.Sin((1-t)*theta) / sin
	wb = math.Sin(t*theta) / sin
	return quat.Number{
		Real: wa*a.Real + wb*b.Real,
		Imag: wa*a.Imag + wb*b.Imag,
		Jmag: wa*a.Jmag + wb*b.Jmag,
		Kmag: wa*a.Kmag + wb*b.Kmag,
	}
}

// Matrix returns the 3×3 rotation matrix R of a unit quaternion, row-major,
// so that R·v = Rotate(q, v). Its columns are the child frame's axes in the
// parent frame.
func Matrix(q quat.Number) [3][3]float64 {
	w, x, y, z := q.Real, q.Imag, q.Jmag, q.Kmag
	return [3][3]float64{
		{1 - 2*(y*y+z*z), 2 * (x*y - w*z), 2 * (x*z + w*y)},
		{2 * (x*y + w*z), 1 - 2*(x*x+z*z), 2 * (y*z - w*x)},
		{2 * (x*z - w*y), 2 * (y*z + w*x), 1 - 2*(x*x+y*y)},
	}
}

// FromMatrix returns the unit quaternion (w ≥ 0) of a rotation matrix, by
// Shepperd's method (J. Guidance and Control 1(3), 1978).
func FromMatrix(m [3][3]float64) quat.Number {
	tr := m[0][0] + m[1][1] + m[2][2]
	var q quat.Number
	switch {
	case tr > m[0][0] && tr > m[1][1] && tr > m[2][2]:
		s := 2 * math.Sqrt(1+tr)
		q = quat.Number{Real: s / 4, Imag: (m[2][1] - m[1][2]) / s, Jmag: (m[0][2] - m[2][0]) / s, Kmag: (m[1][0] - m[0][1]) / s}
	case m[0][0] > m[1][1] && m[0][0] > m[2][2]:
		s := 2 * math.Sqrt(1+m[0][0]-m[1][1]-m[2][2])
		q = quat.Number{Real: (m[2][1] - m[1][2]) / s, Imag: s / 4, Jmag: (m[0][1] + m[1][0]) / s, Kmag: (m[0][2] + m[2][0]) / s}
	case m[1][1] > m[2][2]:
		s := 2 * math.Sqrt(1+m[1][1]-m[0][0]-m[2][2])
		q = quat.Number{Real: (m[0][2] - m[2][0]) / s, Imag: (m[0][1] + m[1][0]) / s, Jmag: s / 4, Kmag: (m[1][2] + m[2][1]) / s}
	default:
		s := 2 * math.Sqrt(1+m[2][2]-m[0][0]-m[1][1])
		q = quat.Number{Real: (m[1][0] - m[0][1]) / s, Imag: (m[0][2] + m[2][0]) / s, Jmag: (m[1][2] + m[2][1]) / s, Kmag: s / 4}
	}
	if q.Real < 0 {
		q = Neg(q)
	}
	q, _ = Normalize(q)
	return q
}

// Heading returns the heading, in rad in (−π, π], of the horizontal
// projection of the frame's x axis, counter-clockwise from the parent's +x
// about +z. It returns 0 when the x axis is vertical.
func Heading(q quat.Number) float64 {
	x := Rotate(q, r3.Vec{X: 1})
	if x.X == 0 && x.Y == 0 {
		return 0
	}
	return math.Atan2(x.Y, x.X)
}

// YawRotation returns the rotation by psi rad about the parent's +z.
func YawRotation(psi float64) quat.Number {
	s, c := math.Sincos(psi / 2)
	return quat.Number{Real: c, Kmag: s}
}
