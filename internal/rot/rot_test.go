package rot

import (
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/num/quat"
	"gonum.org/v1/gonum/spatial/r3"
)

const tol = 1e-12

func randUnit(r *rand.Rand) quat.Number {
	q := quat.Number{Real: r.NormFloat64(), Imag: r.NormFloat64(), Jmag: r.NormFloat64(), Kmag: r.NormFloat64()}
	q, _ = Normalize(q)
	return q
}

func near(a, b quat.Number, eps float64) bool {
	return quat.Abs(quat.Sub(a, b)) <= eps
}

// Reference: gonum num/quat Mul, Conj and Abs.
func TestMulConjNormAgainstGonum(t *testing.T) {
	r := rand.New(rand.NewPCG(1, 2))
	for i := 0; i < 200; i++ {
		a := quat.Number{Real: r.NormFloat64(), Imag: r.NormFloat64(), Jmag: r.NormFloat64(), Kmag: r.NormFloat64()}
		b := quat.Number{Real: r.NormFloat64(), Imag: r.NormFloat64(), Jmag: r.NormFloat64(), Kmag: r.NormFloat64()}
		if got, want := Mul(a, b), quat.Mul(a, b); !near(got, want, tol*10) {
			t.Fatalf("Mul(%v,%v) = %v, gonum %v", a, b, got, want)
		}
		if got, want := Conj(a), quat.Conj(a); got != want {
			t.Fatalf("Conj = %v, gonum %v", got, want)
		}
		if got, want := Norm(a), quat.Abs(a); math.Abs(got-want) > tol*10 {
			t.Fatalf("Norm = %v, gonum %v", got, want)
		}
	}
}

// Reference: gonum spatial/r3 Rotation.Rotate and NewRotation.
func TestRotateAgainstGonum(t *testing.T) {
	r := rand.New(rand.NewPCG(3, 4))
	for i := 0; i < 200; i++ {
		axis := r3.Vec{X: r.NormFloat64(), Y: r.NormFloat64(), Z: r.NormFloat64()}
		angle := (r.Float64()*2 - 1) * 2 * math.Pi
		v := r3.Vec{X: r.NormFloat64(), Y: r.NormFloat64(), Z: r.NormFloat64()}
		want := r3.NewRotation(angle, axis).Rotate(v)
		q := FromAxisAngle(axis, angle)
		if got := Rotate(q, v); r3.Norm(r3.Sub(got, want)) > 1e-12 {
			t.Fatalf("Rotate = %v, gonum %v", got, want)
		}
		if got := InvRotate(q, Rotate(q, v)); r3.Norm(r3.Sub(got, v)) > 1e-12 {
			t.Fatalf("InvRotate(Rotate(v)) = %v, want %v", got, v)
		}
		m := Matrix(q)
		mv := r3.Vec{
			X: m[0][0]*v.X + m[0][1]*v.Y + m[0][2]*v.Z,
			Y: m[1][0]*v.X + m[1][1]*v.Y + m[1][2]*v.Z,
			Z: m[2][0]*v.X + m[2][1]*v.Y + m[2][2]*v.Z,
		}
		if r3.Norm(r3.Sub(mv, want)) > 1e-12 {
			t.Fatalf("Matrix·v = %v, gonum %v", mv, want)
		}
		if back := FromMatrix(m); Angle(back, q) > 1e-7 {
			t.Fatalf("FromMatrix(Matrix(q)) off by %g rad", Angle(back, q))
		}
	}
}

// Reference: gonum num/quat Exp and Log: exp(v/2) and 2·log(q).
func TestRotVecAgainstGonumExpLog(t *testing.T) {
	r := rand.New(rand.NewPCG(5, 6))
	for i := 0; i < 200; i++ {
		v := r3.Vec{X: r.NormFloat64(), Y: r.NormFloat64(), Z: r.NormFloat64()}
		v = r3.Scale(r.Float64()*math.Pi/r3.Norm(v), v)
		want := quat.Exp(quat.Number{Imag: v.X / 2, Jmag: v.Y / 2, Kmag: v.Z / 2})
		q := FromRotVec(v)
		if !near(q, want, 1e-12) {
			t.Fatalf("FromRotVec(%v) = %v, gonum Exp %v", v, q, want)
		}
		l := quat.Log(q)
		wantV := r3.Vec{X: 2 * l.Imag, Y: 2 * l.Jmag, Z: 2 * l.Kmag}
		if got := ToRotVec(q); r3.Norm(r3.Sub(got, wantV)) > 1e-9 {
			t.Fatalf("ToRotVec = %v, gonum 2·Log %v", got, wantV)
		}
	}
	// Small angles use the series branch.
	small := r3.Vec{X: 1e-10, Y: -2e-10, Z: 3e-10}
	if got := ToRotVec(FromRotVec(small)); r3.Norm(r3.Sub(got, small)) > 1e-22 {
		t.Fatalf("small rotation vector round trip: %v, want %v", got, small)
	}
}

// Closed form: slerp between rotations about one axis moves the angle linearly.
func TestSlerpSingleAxis(t *testing.T) {
	axis := r3.Vec{X: 1, Y: 2, Z: -0.5}
	for _, span := range []float64{1e-4, 0.3, 2.5, 3.1} {
		a := FromAxisAngle(axis, 0.2)
		b := FromAxisAngle(axis, 0.2+span)
		for _, tt := range []float64{0, 0.25, 0.5, 0.9, 1} {
			want := FromAxisAngle(axis, 0.2+tt*span)
			if got := Slerp(a, b, tt); Angle(got, want) > 1e-7 {
				t.Fatalf("span %g t %g: off by %g rad", span, tt, Angle(got, want))
			}
		}
		// Shorter arc: −b is the same rotation.
		if got := Slerp(a, Neg(b), 0.5); Angle(got, FromAxisAngle(axis, 0.2+span/2)) > 1e-7 {
			t.Fatalf("slerp did not take the shorter arc")
		}
	}
}

func TestHeadingAndYaw(t *testing.T) {
	for _, psi := range []float64{-3, -1, 0, 0.5, 2, 3.1} {
		q := Mul(YawRotation(psi), FromAxisAngle(r3.Vec{Y: 1}, 0.4))
		if got := Heading(q); math.Abs(got-psi) > 1e-12 {
			t.Fatalf("Heading = %g, want %g", got, psi)
		}
	}
}
