package rot

import (
	"math"

	"gonum.org/v1/gonum/num/quat"
)

// SlerpPrecise returns the spherical linear interpolation from a (t = 0) to
// b (t = 1) along the shorter arc, a ⊗ (a* ⊗ b)^t, accurate to rounding for
// every angle between a and b.
//
// It differs from Slerp only for nearly parallel a and b, where Slerp falls
// back to normalised linear interpolation (off by up to about 1e-6 rad). The
// angle θ between a and b on the unit sphere is taken as atan2(|e|, a·b) with
// e = b − (a·b)·a, which stays accurate as θ → 0, and the result is
// cos(tθ)·a + sin(tθ)·e/|e|. When b equals ±a, it returns a.
func SlerpPrecise(a, b quat.Number, t float64) quat.Number {
	d := Dot(a, b)
	if d < 0 {
		b = Neg(b)
		d = -d
	}
	e := quat.Number{
		Real: b.Real - d*a.Real,
		Imag: b.Imag - d*a.Imag,
		Jmag: b.Jmag - d*a.Jmag,
		Kmag: b.Kmag - d*a.Kmag,
	}
	s := Norm(e)
	if s == 0 {
		return a
	}
	theta := math.Atan2(s, d)
	sn, cs := math.Sincos(t * theta)
	k := sn / s
	return quat.Number{
		Real: cs*a.Real + k*e.Real,
		Imag: cs*a.Imag + k*e.Imag,
		Jmag: cs*a.Jmag + k*e.Jmag,
		Kmag: cs*a.Kmag + k*e.Kmag,
	}
}
