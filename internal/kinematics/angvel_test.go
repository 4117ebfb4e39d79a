package kinematics

import (
	"encoding/json"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"testing"

	"gonum.org/v1/gonum/num/quat"
	"gonum.org/v1/gonum/spatial/r3"

	"github.com/kinchain/kinchain/internal/rot"
)

// Reference: closed form. Rotation at a constant rate ω about a body-fixed
// axis, q(t) = q0 ⊗ exp(ω_b·t/2), has body angular velocity ω_b and world
// angular velocity q0 ⊗ ω_b ⊗ q0* at every instant; the relative-rotation
// difference is exact for it (central and one-sided alike), up to rounding
// (1e-12 relative), including rates near π rad per sample pair.
func TestAngularVelocityConstantSpin(t *testing.T) {
	r := rand.New(rand.NewPCG(1, 2))
	for trial := 0; trial < 50; trial++ {
		rate := []float64{100, 240, 1000}[trial%3]
		wb := r3.Scale(0.1+r.Float64()*rate*1.5, r3.Unit(randVec(r)))
		q0 := randUnit(r)
		n := 20
		q := make([]quat.Number, n)
		for i := range q {
			q[i] = rot.Mul(q0, rot.FromRotVec(r3.Scale(float64(i)/rate, wb)))
			if i%3 == 1 {
				q[i] = rot.Neg(q[i]) // differences must not care about signs
			}
		}
		world, body := make([]r3.Vec, n), make([]r3.Vec, n)
		AngularVelocity(q, nil, rate, world, body)
		ww := rot.Rotate(q0, wb)
		for i := range q {
			if d := r3.Norm(r3.Sub(body[i], wb)); d > 1e-12*r3.Norm(wb) {
				t.Fatalf("rate %g |ω| %g: body[%d] = %v, want %v", rate, r3.Norm(wb), i, body[i], wb)
			}
			if d := r3.Norm(r3.Sub(world[i], ww)); d > 1e-12*r3.Norm(wb) {
				t.Fatalf("rate %g: world[%d] = %v, want %v", rate, i, world[i], ww)
			}
		}
	}
}

// coning is q(t) = Rz(Ω·t) ⊗ Rx(β) ⊗ Rz(σ·t): the body z axis precesses at
// rate Ω on a cone of half-angle β while the body spins at σ about it.
// Closed form: ω_world = Ω·ẑ + σ·(sin β sin Ωt, −sin β cos Ωt, cos β).
type coning struct{ Omega, beta, sigma float64 }

func (c coning) at(t float64) quat.Number {
	return rot.Mul(rot.YawRotation(c.Omega*t), rot.Mul(rot.FromAxisAngle(r3.Vec{X: 1}, c.beta), rot.YawRotation(c.sigma*t)))
}

func (c coning) world(t float64) r3.Vec {
	sb, cb := math.Sincos(c.beta)
	s, co := math.Sincos(c.Omega * t)
	return r3.Vec{X: c.sigma * sb * s, Y: -c.sigma * sb * co, Z: c.Omega + c.sigma*cb}
}

// Reference: the closed-form angular velocity of coning motion (above). The
// central difference of the relative rotation is second-order accurate: the
// error must fall by a factor of about 4 (3.5–4.5) each time the rate
// doubles, and stay below 5e-4 rad/s at 1 kHz (|ω| ≈ 21 rad/s; the leading
// error terms, ω̈Δ²/6 and the Baker–Campbell–Hausdorff term ½ω×ω̇·Δ², come to
// a few 1e-4 rad/s here; measured 3.4e-4).
func TestAngularVelocityConing(t *testing.T) {
	c := coning{Omega: 2 * math.Pi * 1.5, beta: 0.6, sigma: 12}
	prev := 0.0
	for _, rate := range []float64{250, 500, 1000, 2000} {
		n := int(rate) // 1 s
		q := make([]quat.Number, n)
		for i := range q {
			q[i] = c.at(float64(i) / rate)
		}
		world, body := make([]r3.Vec, n), make([]r3.Vec, n)
		AngularVelocity(q, nil, rate, world, body)
		errMax := 0.0
		for i := 1; i < n-1; i++ {
			ti := float64(i) / rate
			want := c.world(ti)
			errMax = math.Max(errMax, r3.Norm(r3.Sub(world[i], want)))
			// Body and world agree through the sample's orientation to the
			// same order.
			errMax = math.Max(errMax, r3.Norm(r3.Sub(rot.Rotate(q[i], body[i]), want)))
		}
		if rate == 1000 && errMax > 5e-4 {
			t.Errorf("1 kHz: error %g rad/s", errMax)
		}
		if prev > 0 {
			if ratio := prev / errMax; ratio < 3.5 || ratio > 4.5 {
				t.Errorf("rate %g: error ratio %.2f, want ≈ 4 (second order)", rate, ratio)
			}
		}
		prev = errMax
	}
}

// Reference: scipy.spatial.transform.Rotation on a smooth random trajectory
// (golden rotvec.json): world[i] = (R[i+1]·R[i−1]⁻¹).as_rotvec()·fs/2,
// body[i] = (R[i−1]⁻¹·R[i+1]).as_rotvec()·fs/2, one-sided at the ends.
// Tolerance 1e-10 relative to |ω| (both sides compute the same rotation
// vectors; the angle between samples reaches about 1 rad).
func TestAngularVelocityAgainstScipy(t *testing.T) {
	b, err := os.ReadFile(filepath.Join("..", "..", "testdata", "golden", "scipy", "rotvec.json"))
	if err != nil {
		t.Fatalf("golden file: %v (regenerate with /usr/bin/python3 testdata/golden/scipy/gen.py)", err)
	}
	var g struct {
		Fs    float64      `json:"fs_hz"`
		Q     [][4]float64 `json:"q_wxyz"`
		World [][3]float64 `json:"omega_world"`
		Body  [][3]float64 `json:"omega_body"`
	}
	if err := json.Unmarshal(b, &g); err != nil {
		t.Fatal(err)
	}
	n := len(g.Q)
	q := make([]quat.Number, n)
	for i, v := range g.Q {
		q[i] = quat.Number{Real: v[0], Imag: v[1], Jmag: v[2], Kmag: v[3]}
	}
	world, body := make([]r3.Vec, n), make([]r3.Vec, n)
	AngularVelocity(q, nil, g.Fs, world, body)
	big := 0.0
	for i := 0; i < n; i++ {
		ww := r3.Vec{X: g.World[i][0], Y: g.World[i][1], Z: g.World[i][2]}
		wb := r3.Vec{X: g.Body[i][0], Y: g.Body[i][1], Z: g.Body[i][2]}
		big = math.Max(big, r3.Norm(ww)/g.Fs)
		if d := r3.Norm(r3.Sub(world[i], ww)); d > 1e-10*r3.Norm(ww) {
			t.Fatalf("world[%d] = %v, scipy %v", i, world[i], ww)
		}
		if d := r3.Norm(r3.Sub(body[i], wb)); d > 1e-10*r3.Norm(wb) {
			t.Fatalf("body[%d] = %v, scipy %v", i, body[i], wb)
		}
	}
	only := make([]r3.Vec, n)
	AngularVelocity(q, nil, g.Fs, only, nil)
	for i := range only {
		if d := r3.Norm(r3.Sub(only[i], world[i])); d > 1e-10*r3.Norm(world[i]) {
			t.Fatalf("world-only world[%d] = %v, with body %v", i, only[i], world[i])
		}
	}
	if big < 0.5 {
		t.Errorf("golden trajectory too slow to test large angles (max %g rad per sample)", big)
	}
}

// Reference: the contract of AngularVelocity for invalid samples — no
// difference spans an invalid sample: next to one, the one-sided difference
// is used (exact for a constant spin), and invalid or isolated samples get
// zero.
func TestAngularVelocityInvalid(t *testing.T) {
	wb := r3.Vec{X: 1, Y: -2, Z: 5}
	const rate = 100.0
	n := 12
	q := make([]quat.Number, n)
	for i := range q {
		q[i] = rot.FromRotVec(r3.Scale(float64(i)/rate, wb))
	}
	valid := []bool{true, true, true, false, false, true, true, false, true, false, true, true}
	// A wild orientation in an invalid sample must not leak out.
	q[3] = rot.FromAxisAngle(r3.Vec{X: 1}, 2)
	world, body := make([]r3.Vec, n), make([]r3.Vec, n)
	AngularVelocity(q, valid, rate, world, body)
	for i := range q {
		isolated := valid[i] && (i == 0 || !valid[i-1]) && (i == n-1 || !valid[i+1])
		want := wb
		if !valid[i] || isolated {
			want = r3.Vec{}
		}
		if r3.Norm(r3.Sub(body[i], want)) > 1e-12 {
			t.Errorf("sample %d (valid %v): body %v, want %v", i, valid[i], body[i], want)
		}
	}
}

// Reference: gonum num/quat Log (rotvec = 2·vector part of log q for unit
// q) and rot.ToRotVec: the series branch of rotVec agrees with both to
// rounding (8e-16 relative, a few ulps) across the switch-over at s/w = 1/16, and for
// tiny and zero angles.
func TestRotVecAgainstGonum(t *testing.T) {
	r := rand.New(rand.NewPCG(13, 14))
	for i := 0; i < 20000; i++ {
		angle := math.Pow(10, -12+12.5*r.Float64()) // up to ~3 rad
		if i%10 == 0 {
			angle = 2 * math.Atan(1.0/16) * (1 + 1e-3*(r.Float64()-0.5))
		}
		q := rot.FromAxisAngle(randVec(r), angle)
		if i%2 == 0 {
			q = rot.Neg(q)
		}
		got := rotVec(q)
		want := rot.ToRotVec(q)
		l := quat.Log(q)
		if q.Real < 0 {
			l = quat.Log(rot.Neg(q))
		}
		gon := r3.Vec{X: 2 * l.Imag, Y: 2 * l.Jmag, Z: 2 * l.Kmag}
		tol := 2e-16 * math.Max(angle, 1e-300) * 4
		if d := r3.Norm(r3.Sub(got, want)); d > tol {
			t.Fatalf("angle %g: rotVec %v, rot.ToRotVec %v (diff %g)", angle, got, want, d)
		}
		if d := r3.Norm(r3.Sub(got, gon)); d > tol {
			t.Fatalf("angle %g: rotVec %v, gonum %v (diff %g)", angle, got, gon, d)
		}
	}
	if v := rotVec(rot.Identity); v != (r3.Vec{}) {
		t.Errorf("identity: %v", v)
	}
}
