package kinematics

import (
	"math"
	"math/rand/v2"

	"gonum.org/v1/gonum/num/quat"
	"gonum.org/v1/gonum/spatial/r3"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/capture"
	"github.com/kinchain/kinchain/internal/rot"
)

func randUnit(r *rand.Rand) quat.Number {
	q, _ := rot.Normalize(quat.Number{Real: r.NormFloat64(), Imag: r.NormFloat64(), Jmag: r.NormFloat64(), Kmag: r.NormFloat64()})
	return q
}

func randVec(r *rand.Rand) r3.Vec {
	return r3.Vec{X: r.NormFloat64(), Y: r.NormFloat64(), Z: r.NormFloat64()}
}

// motion is a closed-form orientation history with its body angular
// velocity.
type motion interface {
	at(t float64) quat.Number
	omegaBody(t float64) r3.Vec
}

// swingMotion is a swing-like rotation: q(t) = q0 ⊗ Rz(θ(t)) ⊗ Rx(φ(t)),
// with θ' a Gaussian pulse of height amp rad/s and width sigma s centred at
// t0 (a turn that accelerates and decelerates), and φ(t) = b·sin(2πf·t)
// (a slower cocking motion about the turned x axis).
type swingMotion struct {
	q0             quat.Number
	amp, t0, sigma float64
	b, f           float64
}

func (m swingMotion) theta(t float64) float64 {
	return m.amp * m.sigma * math.Sqrt(math.Pi/2) * (1 + math.Erf((t-m.t0)/(m.sigma*math.Sqrt2)))
}

func (m swingMotion) at(t float64) quat.Number {
	phi := m.b * math.Sin(2*math.Pi*m.f*t)
	return rot.Mul(m.q0, rot.Mul(rot.FromAxisAngle(r3.Vec{Z: 1}, m.theta(t)), rot.FromAxisAngle(r3.Vec{X: 1}, phi)))
}

// omegaBody: for q = q0 ⊗ A(t) ⊗ B(t), ω_body = B* ⊗ ω_A ⊗ B + ω_B with
// ω_A = θ'·z, ω_B = φ'·x.
func (m swingMotion) omegaBody(t float64) r3.Vec {
	dth := m.amp * math.Exp(-(t-m.t0)*(t-m.t0)/(2*m.sigma*m.sigma))
	phi := m.b * math.Sin(2*math.Pi*m.f*t)
	dphi := m.b * 2 * math.Pi * m.f * math.Cos(2*math.Pi*m.f*t)
	B := rot.FromAxisAngle(r3.Vec{X: 1}, phi)
	return r3.Add(rot.InvRotate(B, r3.Vec{Z: dth}), r3.Vec{X: dphi})
}

// track samples m at rate Hz over [0, dur] s, with the body angular
// velocity as gyroscope reading, as seen by a sensor mounted with rotation
// mount (q_sensor = q_segment ⊗ mount).
func track(seg kinchainv1.Segment, m motion, rate, dur float64, mount quat.Number) capture.Track {
	n := int(math.Round(dur*rate)) + 1
	tr := capture.Track{Segment: seg, Time: make([]float64, n), Q: make([]quat.Number, n), Gyro: make([]r3.Vec, n)}
	for i := range tr.Time {
		t := float64(i) / rate
		tr.Time[i] = t
		tr.Q[i] = rot.Mul(m.at(t), mount)
		tr.Gyro[i] = rot.InvRotate(mount, m.omegaBody(t))
	}
	return tr
}

func relDiff(a, b []float64) float64 {
	d, s := 0.0, 0.0
	for i := range a {
		d = math.Max(d, math.Abs(a[i]-b[i]))
		s = math.Max(s, math.Abs(b[i]))
	}
	return d / s
}
