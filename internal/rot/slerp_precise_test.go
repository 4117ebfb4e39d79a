package rot

import (
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/num/quat"
	"gonum.org/v1/gonum/spatial/r3"
)

// Reference: gonum num/quat — a ⊗ PowReal(a* ⊗ b, t), the closed form of
// SLERP (Shoemake 1985), with b taken in a's hemisphere.
func TestSlerpPreciseAgainstGonumPow(t *testing.T) {
	r := rand.New(rand.NewPCG(5, 6))
	for i := 0; i < 2000; i++ {
		a := randUnit(r)
		// Angles from 1e-9 rad to nearly π, so both the nearly parallel and
		// the wide case are covered.
		angle := math.Pow(10, -9+9.4*r.Float64())
		axis := randUnit(r)
		b := Mul(a, FromAxisAngle(r3.Vec{X: axis.Imag, Y: axis.Jmag, Z: axis.Kmag}, angle))
		if r.IntN(2) == 0 {
			b = Neg(b)
		}
		tt := r.Float64()*1.4 - 0.2
		bb := b
		if Dot(a, bb) < 0 {
			bb = Neg(bb)
		}
		want := Mul(a, quat.PowReal(Mul(Conj(a), bb), tt))
		got := SlerpPrecise(a, b, tt)
		// Tolerance: a few ulps of a unit quaternion.
		if d := quat.Abs(quat.Sub(got, want)); d > 1e-14 {
			t.Fatalf("angle %g t %g: SlerpPrecise = %v, gonum %v (|diff| %g)", angle, tt, got, want, d)
		}
	}
}

// Reference: the definition of SLERP (Shoemake 1985): t = 0 gives a, t = 1
// gives b taken into a's hemisphere, and a to ±a stays at a.
func TestSlerpPreciseEndpointsAndEqual(t *testing.T) {
	r := rand.New(rand.NewPCG(7, 8))
	for i := 0; i < 200; i++ {
		a, b := randUnit(r), randUnit(r)
		if got := SlerpPrecise(a, b, 0); !near(got, a, 1e-15) {
			t.Fatalf("t=0: %v, want %v", got, a)
		}
		bb := b
		if Dot(a, b) < 0 {
			bb = Neg(b)
		}
		if got := SlerpPrecise(a, b, 1); !near(got, bb, 1e-14) {
			t.Fatalf("t=1: %v, want %v", got, bb)
		}
		if got := SlerpPrecise(a, a, 0.3); !near(got, a, 1e-15) {
			t.Fatalf("a to a: %v, want %v", got, a)
		}
		if got := SlerpPrecise(a, Neg(a), 0.3); !near(got, a, 1e-15) {
			t.Fatalf("a to -a: %v, want %v", got, a)
		}
	}
}
