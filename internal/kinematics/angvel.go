package kinematics

import (
	"gonum.org/v1/gonum/num/quat"
	"gonum.org/v1/gonum/spatial/r3"

	"github.com/kinchain/kinchain/internal/rot"
)

// AngularVelocity computes angular velocity, rad/s, from orientations q
// (segment → world) sampled at rate Hz by differencing the relative rotation
// of neighbouring samples, never the quaternion components:
//
//	ω_world[i] = rotvec(q[i+1] ⊗ q[i−1]*) · rate/2
//	ω_body[i]  = rotvec(q[i−1]* ⊗ q[i+1]) · rate/2
//
// (the mean angular velocity over [i−1, i+1], exact for rotation at a
// constant rate about a fixed axis), where rotvec is the rotation vector
// (rot.ToRotVec). Where only one neighbour is usable the difference is
// one-sided: rotvec(q[i+1] ⊗ q[i]*)·rate (first sample, or after an invalid
// one) or rotvec(q[i] ⊗ q[i−1]*)·rate. When body is wanted, the world
// vector is computed from it as q[a] ⊗ ω_body ⊗ q[a]* (a the earlier sample
// of the pair), which equals the formula above because conjugation by q[a]
// maps the relative rotation q[a]* ⊗ q[b] onto q[b] ⊗ q[a]*.
//
// valid (nil: every sample valid) marks the usable samples: no difference
// spans an invalid sample, and invalid samples, like valid ones with no
// valid neighbour, get zero. world and body, when not nil, must have len(q)
// entries. Checked against closed-form motions and scipy's
// Rotation.as_rotvec (testdata/golden/scipy/rotvec.json).
func AngularVelocity(q []quat.Number, valid []bool, rate float64, world, body []r3.Vec) {
	n := len(q)
	if valid == nil && world != nil && n >= 3 {
		// Every sample valid: the central difference everywhere but at the
		// ends, without the per-sample checks.
		k := rate / 2
		_ = world[n-1]
		if body != nil {
			_ = body[n-1]
		}
		if body == nil {
			// World only: rotvec(q[i+1] ⊗ q[i−1]*) directly.
			for i := 1; i < n-1; i++ {
				v := rotVec(rot.Mul(q[i+1], rot.Conj(q[i-1])))
				world[i] = r3.Vec{X: v.X * k, Y: v.Y * k, Z: v.Z * k}
			}
		}
		for i := 1; i < n-1 && body != nil; i++ {
			a := q[i-1]
			v := rotVec(rot.Mul(rot.Conj(a), q[i+1]))
			v = r3.Vec{X: v.X * k, Y: v.Y * k, Z: v.Z * k}
			body[i] = v
			world[i] = rot.Rotate(a, v)
		}
		for _, i := range [2]int{0, n - 1} {
			a, b := i, i+1
			if i > 0 {
				a, b = i-1, i
			}
			v := r3.Scale(rate, rotVec(rot.Mul(rot.Conj(q[a]), q[b])))
			if body != nil {
				body[i] = v
			}
			world[i] = rot.Rotate(q[a], v)
		}
		return
	}
	ok := func(i int) bool { return i >= 0 && i < n && (valid == nil || valid[i]) }
	for i := 0; i < n; i++ {
		var a, b int
		var k float64
		switch {
		case i > 0 && i < n-1 && (valid == nil || (valid[i-1] && valid[i] && valid[i+1])):
			a, b, k = i-1, i+1, rate/2
		case !ok(i):
			a = -1
		case ok(i + 1):
			a, b, k = i, i+1, rate
		case ok(i - 1):
			a, b, k = i-1, i, rate
		default:
			a = -1
		}
		if a < 0 {
			if world != nil {
				world[i] = r3.Vec{}
			}
			if body != nil {
				body[i] = r3.Vec{}
			}
			continue
		}
		v := rotVec(rot.Mul(rot.Conj(q[a]), q[b]))
		v = r3.Vec{X: v.X * k, Y: v.Y * k, Z: v.Z * k}
		if body != nil {
			body[i] = v
		}
		if world != nil {
			world[i] = rot.Rotate(q[a], v)
		}
	}
}

// rotVec is rot.ToRotVec, 2·atan2(s, w)/s times the vector part (s its
// norm, w ≥ 0 after choosing the sign), with atan(x)/x evaluated by its
// Taylor series Σ_{j=0}^{7} (−x²)^j/(2j+1) for x = s/w ≤ 1/16, where eight
// terms reach rounding (the next, x¹⁶/17, is below 2⁻⁶⁸), in Estrin's scheme
// (pairs of terms combined in parallel). Neighbouring samples differ by
// small rotations, so this avoids the atan2 call for nearly every sample.
func rotVec(q quat.Number) r3.Vec {
	w := q.Real
	if w < 0 {
		q = rot.Neg(q)
		w = -w
	}
	ss := q.Imag*q.Imag + q.Jmag*q.Jmag + q.Kmag*q.Kmag
	if !(ss <= w*w*(1.0/256)) {
		return rot.ToRotVec(q)
	}
	iw := 1 / w
	y := ss * iw * iw
	y2 := y * y
	y4 := y2 * y2
	p01 := 1 - y*(1.0/3)
	p23 := 1.0/5 - y*(1.0/7)
	p45 := 1.0/9 - y*(1.0/11)
	p67 := 1.0/13 - y*(1.0/15)
	p := (p01 + y2*p23) + y4*(p45+y2*p67)
	k := 2 * p * iw
	return r3.Vec{X: q.Imag * k, Y: q.Jmag * k, Z: q.Kmag * k}
}

// FromGyro sets the angular velocity from gyroscope readings already in the
// segment frame: body[i] = gyro[i], world[i] = q[i] ⊗ gyro[i] ⊗ q[i]*
// (a gyroscope measures the body-frame angular velocity). Invalid samples
// get zero.
func FromGyro(q []quat.Number, gyro []r3.Vec, valid []bool, world, body []r3.Vec) {
	for i := range q {
		if valid != nil && !valid[i] {
			world[i], body[i] = r3.Vec{}, r3.Vec{}
			continue
		}
		body[i] = gyro[i]
		world[i] = rot.Rotate(q[i], gyro[i])
	}
}
