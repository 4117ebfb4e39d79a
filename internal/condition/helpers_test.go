package condition

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

// spin is a constant-rate rotation about a body-fixed axis:
// q(t) = q0 ⊗ exp(ω·t/2), ω in rad/s in the body frame.
type spin struct {
	q0 quat.Number
	w  r3.Vec
}

func (s spin) at(t float64) quat.Number { return rot.Mul(s.q0, rot.FromRotVec(r3.Scale(t, s.w))) }

// times returns n sample times from t0 at rate Hz, each moved by up to
// ±jitter·interval (uniform).
func times(r *rand.Rand, t0, rate float64, n int, jitter float64) []float64 {
	t := make([]float64, n)
	for i := range t {
		j := 0.0
		if jitter > 0 {
			j = jitter * (2*r.Float64() - 1)
		}
		t[i] = t0 + (float64(i)+j)/rate
	}
	return t
}

// spinTrack samples s at times ts, with the body angular velocity as the
// gyroscope reading.
func spinTrack(seg kinchainv1.Segment, s spin, ts []float64) capture.Track {
	tr := capture.Track{Segment: seg, Time: ts, Q: make([]quat.Number, len(ts)), Gyro: make([]r3.Vec, len(ts))}
	for i, t := range ts {
		tr.Q[i] = s.at(t)
		tr.Gyro[i] = s.w
	}
	return tr
}

func angleDeg(a, b quat.Number) float64 { return rot.Angle(a, b) * 180 / math.Pi }

func hasWarning(ws []*kinchainv1.Warning, code kinchainv1.WarningCode, seg kinchainv1.Segment) *kinchainv1.Warning {
	for _, w := range ws {
		if w.GetCode() == code && w.GetSegment() == seg {
			return w
		}
	}
	return nil
}

// angle returns the angle, rad, of the rotation taking a to b, accurate for
// small angles (|rotvec(a* ⊗ b)|; rot.Angle's acos loses half the digits
// there).
func angle(a, b quat.Number) float64 { return r3.Norm(rot.ToRotVec(rot.Mul(rot.Conj(a), b))) }
