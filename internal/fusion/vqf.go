package fusion

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/num/quat"
	"gonum.org/v1/gonum/spatial/r3"

	"github.com/kinchain/kinchain/internal/rot"
)

const deg = math.Pi / 180

// Params tunes the VQF filter. A zero field takes its default; the defaults
// are those published with the paper (Laidig & Seel 2023), quoted from
// memory and compared with the parameter documentation of the authors'
// reference implementation (dlaidig/vqf, vqf.hpp); they suit any IMU
// without tuning. Units are SI; each default is also given in the paper's
// units.
type Params struct {
	// TauAcc is the time constant of the accelerometer low-pass in the
	// almost-inertial frame, s. Default 3 s. Larger trusts the gyroscope
	// longer (better under sustained acceleration).
	TauAcc float64
	// TauMag is the time constant of the magnetometer heading correction,
	// s. Default 9 s; negative: the heading is set from the first field
	// sample only.
	TauMag float64

	// NoMotionBiasEst disables gyroscope bias estimation during motion.
	NoMotionBiasEst bool
	// NoRestBiasEst disables rest detection and bias estimation at rest.
	NoRestBiasEst bool
	// NoMagDistRejection disables magnetic disturbance detection and
	// rejection.
	NoMagDistRejection bool

	// BiasSigmaInit is the standard deviation of the initial bias estimate,
	// rad/s. Default 0.5 °/s.
	BiasSigmaInit float64
	// BiasForgettingTime is the time in which the bias variance grows from
	// 0 to (0.1 °/s)² without measurement updates, s. Default 100 s.
	BiasForgettingTime float64
	// BiasClip bounds the bias estimate and the disagreement fed to the
	// bias update, rad/s. Default 2 °/s.
	BiasClip float64
	// BiasSigmaMotion is the steady-state standard deviation of the bias
	// estimate in motion, rad/s. Default 0.1 °/s.
	BiasSigmaMotion float64
	// BiasVerticalForgettingFactor scales down the weight of the (absent)
	// measurement of the bias's vertical component in motion, so it is
	// forgotten slowly rather than held. Default 0.0001.
	BiasVerticalForgettingFactor float64
	// BiasSigmaRest is the steady-state standard deviation of the bias
	// estimate at rest, rad/s. Default 0.03 °/s.
	BiasSigmaRest float64

	// RestMinT is how long the rest criteria must hold before rest is
	// declared, s. Default 1.5 s.
	RestMinT float64
	// RestFilterTau is the time constant of the low-pass of gyroscope and
	// accelerometer used by rest detection, s. Default 0.5 s.
	RestFilterTau float64
	// RestThGyr is the largest deviation of the gyroscope from its low-pass
	// (and the largest |low-pass| per axis is BiasClip) at rest, rad/s.
	// Default 2 °/s.
	RestThGyr float64
	// RestThAcc is the largest deviation of the accelerometer from its
	// low-pass at rest, m/s². Default 0.5 m/s².
	RestThAcc float64

	// MagCurrentTau is the time constant of the low-pass of the field's
	// norm and dip angle before disturbance detection, s. Default 0.05 s;
	// negative: no low-pass.
	MagCurrentTau float64
	// MagRefTau is the time constant with which the reference norm and dip
	// follow the undisturbed field, s. Default 20 s.
	MagRefTau float64
	// MagNormTh is the relative deviation of the field norm from the
	// reference beyond which the field counts as disturbed. Default 0.1.
	MagNormTh float64
	// MagDipTh is the deviation of the dip angle from the reference beyond
	// which the field counts as disturbed, rad. Default 10°.
	MagDipTh float64
	// MagNewTime is how long a new, steady field must be seen in motion
	// before it replaces the reference, s. Default 20 s.
	MagNewTime float64
	// MagNewFirstTime is MagNewTime for the very first reference, s.
	// Default 5 s.
	MagNewFirstTime float64
	// MagNewMinGyr is the angular rate (low-passed, norm) above which time
	// counts toward accepting a new field, rad/s. Default 20 °/s.
	MagNewMinGyr float64
	// MagMinUndisturbedTime is how long the field must match the reference
	// before it counts as undisturbed again, s. Default 0.5 s.
	MagMinUndisturbedTime float64
	// MagMaxRejectionTime is the longest time magnetometer updates are
	// skipped during a disturbance; after it they resume with a reduced
	// gain, s. Default 60 s.
	MagMaxRejectionTime float64
	// MagRejectionFactor divides the heading gain after MagMaxRejectionTime
	// and scales how fast the rejection budget recovers. Default 2.
	MagRejectionFactor float64
}

// DefaultParams returns the published VQF defaults (Laidig & Seel 2023;
// see Params), in SI units.
func DefaultParams() Params {
	return Params{
		TauAcc:                       3,
		TauMag:                       9,
		BiasSigmaInit:                0.5 * deg,
		BiasForgettingTime:           100,
		BiasClip:                     2 * deg,
		BiasSigmaMotion:              0.1 * deg,
		BiasVerticalForgettingFactor: 0.0001,
		BiasSigmaRest:                0.03 * deg,
		RestMinT:                     1.5,
		RestFilterTau:                0.5,
		RestThGyr:                    2 * deg,
		RestThAcc:                    0.5,
		MagCurrentTau:                0.05,
		MagRefTau:                    20,
		MagNormTh:                    0.1,
		MagDipTh:                     10 * deg,
		MagNewTime:                   20,
		MagNewFirstTime:              5,
		MagNewMinGyr:                 20 * deg,
		MagMinUndisturbedTime:        0.5,
		MagMaxRejectionTime:          60,
		MagRejectionFactor:           2,
	}
}

// withDefaults returns p with every zero numeric field set to its default.
func (p Params) withDefaults() Params {
	d := DefaultParams()
	set := func(v *float64, def float64) {
		if *v == 0 {
			*v = def
		}
	}
	set(&p.TauAcc, d.TauAcc)
	set(&p.TauMag, d.TauMag)
	set(&p.BiasSigmaInit, d.BiasSigmaInit)
	set(&p.BiasForgettingTime, d.BiasForgettingTime)
	set(&p.BiasClip, d.BiasClip)
	set(&p.BiasSigmaMotion, d.BiasSigmaMotion)
	set(&p.BiasVerticalForgettingFactor, d.BiasVerticalForgettingFactor)
	set(&p.BiasSigmaRest, d.BiasSigmaRest)
	set(&p.RestMinT, d.RestMinT)
	set(&p.RestFilterTau, d.RestFilterTau)
	set(&p.RestThGyr, d.RestThGyr)
	set(&p.RestThAcc, d.RestThAcc)
	set(&p.MagCurrentTau, d.MagCurrentTau)
	set(&p.MagRefTau, d.MagRefTau)
	set(&p.MagNormTh, d.MagNormTh)
	set(&p.MagDipTh, d.MagDipTh)
	set(&p.MagNewTime, d.MagNewTime)
	set(&p.MagNewFirstTime, d.MagNewFirstTime)
	set(&p.MagNewMinGyr, d.MagNewMinGyr)
	set(&p.MagMinUndisturbedTime, d.MagMinUndisturbedTime)
	set(&p.MagMaxRejectionTime, d.MagMaxRejectionTime)
	set(&p.MagRejectionFactor, d.MagRejectionFactor)
	return p
}

// biasUnit converts rad/s into the unit of the bias covariance's square
// root, 0.01 °/s, as in the reference implementation (the Kalman gain does
// not depend on the unit; this only keeps the numbers near 1).
const biasUnit = 100 / deg

// Filter is a causal VQF orientation estimator for one IMU. It keeps all
// its state in fixed-size fields: Update allocates nothing. A Filter is not
// safe for concurrent use.
type Filter struct {
	p  Params
	ts float64 // nominal sample interval, s

	// coefficients
	accLP     lowpass // tauAcc
	restLP    lowpass // restFilterTau
	magLP     lowpass // magCurrentTau
	kMag      float64
	kMagRef   float64
	biasP0    float64
	biasV     float64
	biasMotW  float64
	biasVertW float64
	biasRestW float64

	// orientation state: q9D = Rz(delta) ⊗ accQuat ⊗ gyrQuat
	gyrQuat quat.Number // strapdown integration, almost-inertial frame
	accQuat quat.Number // inclination correction
	delta   float64     // heading correction, rad
	hadMag  bool

	accLPOut r3.Vec // low-passed acc in the almost-inertial frame
	accLPSt  lpState

	// bias estimation
	bias      r3.Vec     // rad/s
	biasP     [9]float64 // covariance, (0.01 °/s)²
	biasRLP   lpState    // low-pass of the rotation matrix
	biasBLP   lpState    // low-pass of R·bias (x, y)
	restT     float64
	rest      bool
	restGyrLP r3.Vec
	restGyrSt lpState
	restAccLP r3.Vec
	restAccSt lpState
	restDev   [2]float64 // squared deviations, gyr (rad/s)², acc (m/s²)²

	// magnetic disturbance
	magDist      bool
	kMagInit     float64
	magNorm      float64 // current low-passed norm
	magDip       float64 // current low-passed dip, rad
	magNormDipSt lpState
	magRefNorm   float64
	magRefDip    float64
	magUndistT   float64
	magRejectT   float64
	magCandNorm  float64
	magCandDip   float64
	magCandT     float64
	magDisAngle  float64
}

// New returns a Filter for samples dtGyr seconds apart. Zero fields of p
// take their defaults (see Params). dtGyr must be positive and finite, and
// TauAcc and RestFilterTau must not be negative: New panics otherwise, as
// these are programming errors (Track derives dtGyr from checked sample
// times).
func New(p Params, dtGyr float64) *Filter {
	if !(dtGyr > 0) || math.IsInf(dtGyr, 0) {
		panic(fmt.Sprintf("fusion.New: sample interval %v s is not positive and finite", dtGyr))
	}
	if p.TauAcc < 0 || p.RestFilterTau < 0 {
		panic(fmt.Sprintf("fusion.New: negative time constant (TauAcc %v s, RestFilterTau %v s)", p.TauAcc, p.RestFilterTau))
	}
	f := &Filter{}
	f.init(p, dtGyr)
	return f
}

func (f *Filter) init(p Params, ts float64) {
	p = p.withDefaults()
	*f = Filter{p: p, ts: ts}
	f.accLP = butterworth(p.TauAcc, ts)
	f.restLP = butterworth(p.RestFilterTau, ts)
	if p.MagCurrentTau > 0 {
		f.magLP = butterworth(p.MagCurrentTau, ts)
	}
	f.kMag = gainFromTau(p.TauMag, ts)
	f.kMagRef = gainFromTau(p.MagRefTau, ts)

	// Bias Kalman filter (Laidig & Seel 2023, Sec. 3.4, from memory): the
	// process noise V raises the variance from 0 to (0.1 °/s)² in
	// BiasForgettingTime; the measurement noise W = p²/V + p makes p the
	// steady-state posterior variance of the scalar filter,
	// p = (p + V)·W/(p + V + W).
	f.biasP0 = sq(p.BiasSigmaInit * biasUnit)
	f.biasV = sq(0.1*100) * ts / p.BiasForgettingTime
	pMotion := sq(p.BiasSigmaMotion * biasUnit)
	f.biasMotW = sq(pMotion)/f.biasV + pMotion
	f.biasVertW = f.biasMotW / math.Max(p.BiasVerticalForgettingFactor, 1e-10)
	pRest := sq(p.BiasSigmaRest * biasUnit)
	f.biasRestW = sq(pRest)/f.biasV + pRest

	f.gyrQuat = rot.Identity
	f.accQuat = rot.Identity
	f.biasP = [9]float64{f.biasP0, 0, 0, 0, f.biasP0, 0, 0, 0, f.biasP0}
	f.magDist = true
	f.kMagInit = 1
	f.magRejectT = p.MagMaxRejectionTime
	f.magCandNorm = -1
}

// Reset returns the filter to its initial state, keeping its parameters.
func (f *Filter) Reset() { f.init(f.p, f.ts) }

// Params returns the parameters in use, defaults filled in.
func (f *Filter) Params() Params { return f.p }

// Dt returns the nominal sample interval, s.
func (f *Filter) Dt() float64 { return f.ts }

// Update processes one sample: gyr the angular rate (rad/s), acc the
// specific force (m/s²), mag the magnetic field (any unit), all in the
// sensor frame, taken one nominal interval after the previous sample. A zero
// mag means no magnetometer reading (6D); a zero acc is skipped, as in the
// reference implementation. Readings must be finite: a NaN would stay in
// the state for good (Track rejects non-finite readings with an error).
func (f *Filter) Update(gyr, acc, mag r3.Vec) { f.UpdateDt(f.ts, gyr, acc, mag) }

// UpdateDt is Update for a sample dt seconds after the previous one, for
// non-uniform sampling. The gyroscope is integrated over dt and the rest and
// disturbance timers advance by dt; the low-pass filters keep the
// coefficients of the nominal interval (jitter shifts their time constants
// by the same small fraction).
func (f *Filter) UpdateDt(dt float64, gyr, acc, mag r3.Vec) {
	f.updateGyr(gyr, dt)
	f.updateAcc(acc, dt)
	if mag != (r3.Vec{}) {
		f.updateMag(mag, dt)
	}
}

// Prime feeds the filter constant readings (gyr, acc, mag; a zero mag
// means none) for the given number of seconds at the nominal interval, as
// if the sensor had rested in one pose before its first real sample. The
// filter's low-passes start by averaging their input for one time constant
// (TauAcc: 3 s); a swing inside that span pulls the average, and so the
// inclination, far off. Priming with the mean of a still stretch at the
// start of a recording (see Track) completes that start-up phase, detects
// rest and estimates the gyroscope bias from it. The readings should be
// the sensor's mean over a genuinely still stretch. Not part of VQF as
// published.
func (f *Filter) Prime(gyr, acc, mag r3.Vec, seconds float64) {
	n := int(math.Ceil(seconds / f.ts))
	for i := 0; i < n; i++ {
		f.Update(gyr, acc, mag)
	}
}

// updateGyr is the strapdown integration (Laidig & Seel 2023, Sec. 3.1):
// q_gyr ← q_gyr ⊗ exp((ω − b̂)·dt/2), plus the gyroscope half of rest
// detection.
func (f *Filter) updateGyr(gyr r3.Vec, dt float64) {
	if !f.p.NoRestBiasEst || !f.p.NoMagDistRejection {
		g := [3]float64{gyr.X, gyr.Y, gyr.Z}
		var lp [3]float64
		f.restGyrSt.filter(&f.restLP, g[:], lp[:])
		f.restGyrLP = r3.Vec{X: lp[0], Y: lp[1], Z: lp[2]}
		f.restDev[0] = sq(gyr.X-lp[0]) + sq(gyr.Y-lp[1]) + sq(gyr.Z-lp[2])
		clip := f.p.BiasClip
		if f.restDev[0] >= sq(f.p.RestThGyr) || math.Abs(lp[0]) > clip || math.Abs(lp[1]) > clip || math.Abs(lp[2]) > clip {
			f.restT = 0
			f.rest = false
		}
	}
	w := r3.Sub(gyr, f.bias)
	n := math.Sqrt(w.X*w.X + w.Y*w.Y + w.Z*w.Z)
	if n > 1e-300 {
		s, c := math.Sincos(n * dt / 2)
		k := s / n
		step := quat.Number{Real: c, Imag: k * w.X, Jmag: k * w.Y, Kmag: k * w.Z}
		f.gyrQuat, _ = rot.Normalize(rot.Mul(f.gyrQuat, step))
	}
}

// updateAcc is the inclination correction (Laidig & Seel 2023, Sec. 3.2):
// the accelerometer reading is rotated into the almost-inertial frame of the
// gyroscope integration, low-passed there (2nd-order Butterworth, TauAcc),
// rotated by the current inclination correction and the correction is then
// updated to map the result onto vertical. It then runs rest detection and
// the bias update (Sec. 3.3–3.4).
func (f *Filter) updateAcc(acc r3.Vec, dt float64) {
	if acc == (r3.Vec{}) {
		return
	}
	if !f.p.NoRestBiasEst {
		a := [3]float64{acc.X, acc.Y, acc.Z}
		var lp [3]float64
		f.restAccSt.filter(&f.restLP, a[:], lp[:])
		f.restAccLP = r3.Vec{X: lp[0], Y: lp[1], Z: lp[2]}
		f.restDev[1] = sq(acc.X-lp[0]) + sq(acc.Y-lp[1]) + sq(acc.Z-lp[2])
		if f.restDev[1] >= sq(f.p.RestThAcc) {
			f.restT = 0
			f.rest = false
		} else {
			f.restT += dt
			if f.restT >= f.p.RestMinT {
				f.rest = true
			}
		}
	}

	// Low-pass in the almost-inertial frame.
	ai := rot.Rotate(f.gyrQuat, acc)
	v := [3]float64{ai.X, ai.Y, ai.Z}
	f.accLPSt.filter(&f.accLP, v[:], v[:])
	f.accLPOut = r3.Vec{X: v[0], Y: v[1], Z: v[2]}

	// Into the 6D earth frame, normalised.
	ae := rot.Rotate(f.accQuat, f.accLPOut)
	an := math.Sqrt(ae.X*ae.X + ae.Y*ae.Y + ae.Z*ae.Z)
	if an == 0 {
		return
	}
	ae = r3.Scale(1/an, ae)

	// The rotation about a horizontal axis taking ae onto +z.
	var corr quat.Number
	if qw := math.Sqrt((ae.Z + 1) / 2); qw > 1e-6 {
		corr = quat.Number{Real: qw, Imag: 0.5 * ae.Y / qw, Jmag: -0.5 * ae.X / qw}
	} else {
		// ae within ~1e-4° of −z: the correction is a half turn.
		corr = quat.Number{Imag: 1}
	}
	f.accQuat, _ = rot.Normalize(rot.Mul(corr, f.accQuat))

	if !f.p.NoMotionBiasEst || !f.p.NoRestBiasEst {
		f.updateBias(ae)
	}
}

// updateBias is the gyroscope bias Kalman filter (Laidig & Seel 2023,
// Sec. 3.4, from memory). In motion the measurement is the inclination
// correction's angular rate in the earth frame, which equals the low-passed
// R·b (R the 6D orientation) up to the bias already removed: with ae the
// normalised earth-frame accelerometer before correction,
// y = (−ae_y/ts, ae_x/ts) + LP(R·b̂)_xy, modelled as LP(R)·b, and the
// vertical row is a zero measurement with a weight that only slowly forgets.
// At rest the measurement is the low-passed gyroscope itself (R = I).
func (f *Filter) updateBias(ae r3.Vec) {
	clip := f.p.BiasClip
	R := rot.Matrix(f.Quat6D())
	b := f.bias
	var Rm [9]float64
	for i := 0; i < 3; i++ {
		for j := 0; j < 3; j++ {
			Rm[3*i+j] = R[i][j]
		}
	}
	bl := [2]float64{
		Rm[0]*b.X + Rm[1]*b.Y + Rm[2]*b.Z,
		Rm[3]*b.X + Rm[4]*b.Y + Rm[5]*b.Z,
	}
	f.biasRLP.filter(&f.accLP, Rm[:], Rm[:])
	f.biasBLP.filter(&f.accLP, bl[:], bl[:])

	var e, w [3]float64
	update := true
	switch {
	case f.rest && !f.p.NoRestBiasEst:
		e = [3]float64{f.restGyrLP.X - b.X, f.restGyrLP.Y - b.Y, f.restGyrLP.Z - b.Z}
		Rm = [9]float64{1, 0, 0, 0, 1, 0, 0, 0, 1}
		w = [3]float64{f.biasRestW, f.biasRestW, f.biasRestW}
	case !f.p.NoMotionBiasEst:
		ts := f.ts
		e[0] = -ae.Y/ts + bl[0] - (Rm[0]*b.X + Rm[1]*b.Y + Rm[2]*b.Z)
		e[1] = ae.X/ts + bl[1] - (Rm[3]*b.X + Rm[4]*b.Y + Rm[5]*b.Z)
		e[2] = -(Rm[6]*b.X + Rm[7]*b.Y + Rm[8]*b.Z)
		w = [3]float64{f.biasMotW, f.biasMotW, f.biasVertW}
	default:
		update = false
	}

	// P ← P + V, also without a measurement update, up to the initial P.
	for _, i := range [3]int{0, 4, 8} {
		if f.biasP[i] < f.biasP0 {
			f.biasP[i] += f.biasV
		}
	}
	if !update {
		return
	}
	for i := range e {
		e[i] = clamp(e[i], -clip, clip)
	}
	// K = P Rᵀ (W + R P Rᵀ)⁻¹
	PRt := mulABt(f.biasP, Rm)
	S := mul(Rm, PRt)
	S[0] += w[0]
	S[4] += w[1]
	S[8] += w[2]
	Si, ok := inv3(S)
	if !ok {
		return
	}
	K := mul(PRt, Si)
	b.X += K[0]*e[0] + K[1]*e[1] + K[2]*e[2]
	b.Y += K[3]*e[0] + K[4]*e[1] + K[5]*e[2]
	b.Z += K[6]*e[0] + K[7]*e[1] + K[8]*e[2]
	// P ← P − K R P, with K R P = K (P Rᵀ)ᵀ as P is symmetric.
	KRP := mulABt(K, PRt)
	for i := range f.biasP {
		f.biasP[i] -= KRP[i]
	}
	f.bias = r3.Vec{X: clamp(b.X, -clip, clip), Y: clamp(b.Y, -clip, clip), Z: clamp(b.Z, -clip, clip)}
}

// updateMag is the heading correction with disturbance rejection (Laidig &
// Seel 2023, Sec. 3.5–3.6, from memory). The field is rotated into the 6D
// earth frame; its norm and dip angle, low-passed (MagCurrentTau), are
// compared with a reference that is learnt from steady fields seen in
// motion. The heading offset delta follows atan2(m_x, m_y), so that world
// +y points to magnetic north, with gain k = 1 − exp(−ts/TauMag), no
// update during a disturbance (for at most MagMaxRejectionTime), and k at
// least 1/N over the first TauMag seconds for fast initial convergence.
func (f *Filter) updateMag(mag r3.Vec, dt float64) {
	f.hadMag = true
	me := rot.Rotate(f.Quat6D(), mag)
	if !f.p.NoMagDistRejection {
		n := math.Sqrt(me.X*me.X + me.Y*me.Y + me.Z*me.Z)
		nd := [2]float64{n, -math.Asin(clamp(me.Z/n, -1, 1))}
		if p := f.p.MagCurrentTau; p > 0 {
			f.magNormDipSt.filter(&f.magLP, nd[:], nd[:])
		}
		f.magNorm, f.magDip = nd[0], nd[1]
		p := &f.p
		if math.Abs(f.magNorm-f.magRefNorm) < p.MagNormTh*f.magRefNorm && math.Abs(f.magDip-f.magRefDip) < p.MagDipTh {
			f.magUndistT += dt
			if f.magUndistT >= p.MagMinUndisturbedTime {
				f.magDist = false
				f.magRefNorm += f.kMagRef * (f.magNorm - f.magRefNorm)
				f.magRefDip += f.kMagRef * (f.magDip - f.magRefDip)
			}
		} else {
			f.magUndistT = 0
			f.magDist = true
		}
		// Acceptance of a new field.
		if math.Abs(f.magNorm-f.magCandNorm) < p.MagNormTh*f.magCandNorm && math.Abs(f.magDip-f.magCandDip) < p.MagDipTh {
			if r3.Norm(f.restGyrLP) >= p.MagNewMinGyr {
				f.magCandT += dt
			}
			f.magCandNorm += f.kMagRef * (f.magNorm - f.magCandNorm)
			f.magCandDip += f.kMagRef * (f.magDip - f.magCandDip)
			if f.magDist && (f.magCandT >= p.MagNewTime || (f.magRefNorm == 0 && f.magCandT >= p.MagNewFirstTime)) {
				f.magRefNorm = f.magCandNorm
				f.magRefDip = f.magCandDip
				f.magDist = false
				f.magUndistT = p.MagMinUndisturbedTime
			}
		} else {
			f.magCandT = 0
			f.magCandNorm = f.magNorm
			f.magCandDip = f.magDip
		}
	}

	f.magDisAngle = wrapPi(math.Atan2(me.X, me.Y) - f.delta)
	k := f.kMag
	if !f.p.NoMagDistRejection {
		if f.magDist {
			if f.magRejectT <= f.p.MagMaxRejectionTime {
				f.magRejectT += dt
				k = 0
			} else {
				k /= f.p.MagRejectionFactor
			}
		} else {
			f.magRejectT = math.Max(f.magRejectT-f.p.MagRejectionFactor*dt, 0)
		}
	}
	if f.kMagInit != 0 {
		if k < f.kMagInit {
			k = f.kMagInit
		}
		f.kMagInit /= f.kMagInit + 1 // 1, 1/2, 1/3, …
		if f.kMagInit*f.p.TauMag < f.ts {
			f.kMagInit = 0
		}
	}
	f.delta = wrapPi(f.delta + k*f.magDisAngle)
}

// Quat6D returns the orientation from gyroscope and accelerometer only,
// accQuat ⊗ gyrQuat: sensor → world, world z up, heading free.
func (f *Filter) Quat6D() quat.Number { return rot.Mul(f.accQuat, f.gyrQuat) }

// Quat9D returns the orientation with the magnetometer heading correction,
// Rz(delta) ⊗ Quat6D: sensor → world, world x magnetic east, y magnetic
// north, z up. It equals Quat6D until a magnetometer sample arrives.
func (f *Filter) Quat9D() quat.Number {
	return rot.Mul(rot.YawRotation(f.delta), f.Quat6D())
}

// Quat returns Quat9D once a magnetometer reading has been processed and
// Quat6D before.
func (f *Filter) Quat() quat.Number {
	if f.hadMag {
		return f.Quat9D()
	}
	return f.Quat6D()
}

// Bias returns the gyroscope bias estimate in the sensor frame (rad/s) and
// an upper bound of its standard deviation (rad/s): the square root of the
// largest absolute row sum of the covariance (Gershgorin), at most
// BiasSigmaInit.
func (f *Filter) Bias() (r3.Vec, float64) {
	P := f.biasP
	m := 0.0
	for i := 0; i < 3; i++ {
		m = math.Max(m, math.Abs(P[3*i])+math.Abs(P[3*i+1])+math.Abs(P[3*i+2]))
	}
	m = math.Min(m, f.biasP0)
	return f.bias, math.Sqrt(m) / biasUnit
}

// SetBias sets the bias estimate (rad/s, sensor frame) and its standard
// deviation (rad/s; ≤ 0 keeps the covariance).
func (f *Filter) SetBias(b r3.Vec, sigma float64) {
	f.bias = b
	if sigma > 0 {
		p := sq(sigma * biasUnit)
		f.biasP = [9]float64{p, 0, 0, 0, p, 0, 0, 0, p}
	}
}

// Rest reports whether the sensor is currently detected at rest.
func (f *Filter) Rest() bool { return f.rest }

// MagDisturbed reports whether the magnetic field currently counts as
// disturbed (true until a reference field has been learnt).
func (f *Filter) MagDisturbed() bool { return f.magDist }

// Delta returns the heading correction, rad in (−π, π]: the rotation about
// world z from the 6D to the 9D earth frame.
func (f *Filter) Delta() float64 { return f.delta }

// MagReference returns the learnt reference field norm (magnetometer unit)
// and dip angle (rad, positive when the field points below the horizon);
// the norm is 0 while none has been learnt.
func (f *Filter) MagReference() (norm, dip float64) { return f.magRefNorm, f.magRefDip }

func sq(x float64) float64 { return x * x }

func clamp(x, lo, hi float64) float64 {
	if x < lo {
		return lo
	}
	if x > hi {
		return hi
	}
	return x
}

// wrapPi maps an angle in (−3π, 3π) to [−π, π].
func wrapPi(x float64) float64 {
	if x > math.Pi {
		return x - 2*math.Pi
	}
	if x < -math.Pi {
		return x + 2*math.Pi
	}
	return x
}

// mul returns the 3×3 product A·B, row-major.
func mul(a, b [9]float64) [9]float64 {
	var c [9]float64
	for i := 0; i < 3; i++ {
		for j := 0; j < 3; j++ {
			c[3*i+j] = a[3*i]*b[j] + a[3*i+1]*b[3+j] + a[3*i+2]*b[6+j]
		}
	}
	return c
}

// mulABt returns A·Bᵀ, row-major.
func mulABt(a, b [9]float64) [9]float64 {
	var c [9]float64
	for i := 0; i < 3; i++ {
		for j := 0; j < 3; j++ {
			c[3*i+j] = a[3*i]*b[3*j] + a[3*i+1]*b[3*j+1] + a[3*i+2]*b[3*j+2]
		}
	}
	return c
}

// inv3 returns the inverse of a 3×3 matrix by the adjugate, and false when
// it is singular (|det| ≤ 1e-300).
func inv3(m [9]float64) ([9]float64, bool) {
	a := m[4]*m[8] - m[5]*m[7]
	b := m[5]*m[6] - m[3]*m[8]
	c := m[3]*m[7] - m[4]*m[6]
	det := m[0]*a + m[1]*b + m[2]*c
	if math.Abs(det) <= 1e-300 {
		return [9]float64{}, false
	}
	d := 1 / det
	return [9]float64{
		a * d, (m[2]*m[7] - m[1]*m[8]) * d, (m[1]*m[5] - m[2]*m[4]) * d,
		b * d, (m[0]*m[8] - m[2]*m[6]) * d, (m[2]*m[3] - m[0]*m[5]) * d,
		c * d, (m[1]*m[6] - m[0]*m[7]) * d, (m[0]*m[4] - m[1]*m[3]) * d,
	}, true
}
