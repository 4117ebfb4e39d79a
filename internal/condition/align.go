package condition

import (
	"math"

	"gonum.org/v1/gonum/mat"
	"gonum.org/v1/gonum/num/quat"

	"github.com/kinchain/kinchain/internal/rot"
)

// NeutralStillLimit, rad: in the neutral-pose window, a sensor whose
// orientation strays more than 5° from its window mean gets
// WARNING_CODE_NEUTRAL_NOT_STILL. Quiet standing sways the trunk by about a
// degree (from memory); 5° of movement would bias the calibration by a
// few degrees (common practice, no source).
const NeutralStillLimit = 5 * math.Pi / 180

// MeanOrientation returns the average rotation of q by the eigenvector
// method of Markley, Cheng, Crassidis & Oshman, "Averaging Quaternions",
// J. Guidance, Control, and Dynamics 30(4), 2007: the unit eigenvector of
// M = Σ qᵢqᵢᵀ with the largest eigenvalue, which minimises the sum of
// squared chordal distances ‖R(q̄) − R(qᵢ)‖²_F. The result does not depend
// on the signs of the qᵢ; it is returned in q[0]'s hemisphere. The
// eigen-decomposition is gonum's (mat.EigenSym). ok is false when q is
// empty or the decomposition fails.
func MeanOrientation(q []quat.Number) (mean quat.Number, ok bool) {
	if len(q) == 0 {
		return quat.Number{}, false
	}
	var m [10]float64 // upper triangle of the 4×4 sum
	for _, x := range q {
		v := [4]float64{x.Real, x.Imag, x.Jmag, x.Kmag}
		k := 0
		for i := 0; i < 4; i++ {
			for j := i; j < 4; j++ {
				m[k] += v[i] * v[j]
				k++
			}
		}
	}
	s := mat.NewSymDense(4, nil)
	k := 0
	for i := 0; i < 4; i++ {
		for j := i; j < 4; j++ {
			s.SetSym(i, j, m[k])
			k++
		}
	}
	var e mat.EigenSym
	if !e.Factorize(s, true) {
		return quat.Number{}, false
	}
	var vec mat.Dense
	e.VectorsTo(&vec)
	vals := e.Values(nil)
	best := 0
	for i := range vals {
		if vals[i] > vals[best] {
			best = i
		}
	}
	mean = quat.Number{Real: vec.At(0, best), Imag: vec.At(1, best), Jmag: vec.At(2, best), Kmag: vec.At(3, best)}
	mean, n := rot.Normalize(mean)
	if n == 0 {
		return quat.Number{}, false
	}
	if rot.Dot(mean, q[0]) < 0 {
		mean = rot.Neg(mean)
	}
	return mean, true
}

// NeutralMounting returns the mounting rotation m of a sensor (the sensor
// frame's orientation in the segment frame, q_segment = q_sensor ⊗ m*) whose
// mean orientation over a neutral-pose window is mean, such that the segment
// frame then equals the world frame turned by heading rad about world z:
//
//	mean ⊗ m* = Yaw(heading)  ⇔  m = Yaw(heading)* ⊗ mean.
//
// In the neutral pose every body segment frame equals the world frame up to
// the player's heading (DEVELOPERS.md, conventions).
func NeutralMounting(mean quat.Number, heading float64) quat.Number {
	m, _ := rot.Normalize(rot.Mul(rot.YawRotation(-heading), mean))
	return m
}
