package rot

import (
	"math"
	"math/rand/v2"
	"testing"
)

// Round trip over many random rotations for every sequence shape; the
// scipy golden comparison lives with the posture code that uses these angles.
func TestEulerRoundTrip(t *testing.T) {
	seqs := []Sequence{ZYX, XYZ, ZXY, YXY, {X, Z, X}, {Z, Y, Z}, {Y, Z, X}}
	r := rand.New(rand.NewPCG(7, 8))
	for _, seq := range seqs {
		for i := 0; i < 500; i++ {
			q := randUnit(r)
			a, b, c, locked := Euler(seq, q)
			if locked {
				continue
			}
			if back := FromEuler(seq, a, b, c); Angle(back, q) > 1e-6 { // acos near 1 limits precision to ~1e-8
				t.Fatalf("%v: FromEuler(Euler(q)) off by %g rad", seq, Angle(back, q))
			}
		}
	}
}

// Closed form: a single elementary rotation reads as that angle alone.
func TestEulerElementary(t *testing.T) {
	for _, ang := range []float64{-1.2, -0.3, 0.5, 1.4} {
		a, b, c, _ := Euler(ZYX, FromEuler(ZYX, ang, 0, 0))
		if math.Abs(a-ang) > 1e-12 || math.Abs(b) > 1e-12 || math.Abs(c) > 1e-12 {
			t.Fatalf("pure yaw %g read as %g %g %g", ang, a, b, c)
		}
		a, b, c, _ = Euler(ZYX, FromEuler(ZYX, 0, ang, 0))
		if math.Abs(a) > 1e-12 || math.Abs(b-ang) > 1e-12 || math.Abs(c) > 1e-12 {
			t.Fatalf("pure pitch %g read as %g %g %g", ang, a, b, c)
		}
		a, b, c, _ = Euler(ZYX, FromEuler(ZYX, 0, 0, ang))
		if math.Abs(a) > 1e-12 || math.Abs(b) > 1e-12 || math.Abs(c-ang) > 1e-12 {
			t.Fatalf("pure roll %g read as %g %g %g", ang, a, b, c)
		}
	}
}

// At gimbal lock the third angle is set to zero and the first carries the
// combined rotation.
func TestEulerGimbalLock(t *testing.T) {
	q := FromEuler(ZYX, 0.3, math.Pi/2, 0.2)
	a, b, c, locked := Euler(ZYX, q)
	if !locked || c != 0 || math.Abs(b-math.Pi/2) > 1e-6 {
		t.Fatalf("lock not reported: %g %g %g %v", a, b, c, locked)
	}
	if back := FromEuler(ZYX, a, b, c); Angle(back, q) > 1e-6 {
		t.Fatalf("locked angles do not reproduce q: off by %g", Angle(back, q))
	}
	q = FromEuler(YXY, 0.7, 0, 0.4)
	a, b, c, locked = Euler(YXY, q)
	if !locked || math.Abs(a-1.1) > 1e-9 || c != 0 || b > 1e-6 {
		t.Fatalf("YXY lock: %g %g %g %v", a, b, c, locked)
	}
}
