package fusion

import (
	"math"

	"gonum.org/v1/gonum/num/quat"
	"gonum.org/v1/gonum/spatial/r3"
)

// Two classic complementary filters, kept as baselines to compare VQF
// with: Madgwick's gradient-descent filter and Mahony's explicit
// complementary filter. Both follow, step for step, the widely used
// reference code that the npm package ahrs 1.3.3 ships (itself after
// x-io's C code), including its details — the magnetometer reference of
// half the measured magnitude in Madgwick, and Mahony skipping the
// correction when any accelerometer component is exactly zero — so that
// they can be checked sample for sample against that package
// (testdata/golden/ahrs/). Their world frame: x toward magnetic north, y
// west, z up (NWU); without a magnetometer the heading is free. They
// estimate no gyroscope bias (Mahony's integral term aside).

// Madgwick is S. Madgwick's orientation filter ("An efficient orientation
// filter for inertial and inertial/magnetic sensor arrays", report, 2010;
// Madgwick, Harrison & Vaidyanathan, IEEE ICORR 2011): the gyroscope's
// quaternion rate ½·q ⊗ ω minus β times the normalised gradient of the
// error between the measured and the predicted gravity (and field)
// directions, integrated by Euler's method.
type Madgwick struct {
	// Beta is the gain of the gradient step, rad/s.
	Beta float64
	dt   float64
	q    quat.Number
	init bool // set the first orientation from the first sample
}

// NewMadgwick returns a Madgwick filter with gain beta (rad/s) for samples
// dt seconds apart. With initFromFirst the first sample's accelerometer
// (and magnetometer) set the starting orientation (ahrs' doInitialisation);
// otherwise it starts at the identity.
func NewMadgwick(beta, dt float64, initFromFirst bool) *Madgwick {
	return &Madgwick{Beta: beta, dt: dt, q: quat.Number{Real: 1}, init: initFromFirst}
}

// Quat returns the orientation, sensor → world (NWU).
func (f *Madgwick) Quat() quat.Number { return f.q }

// Update processes one sample taken the nominal interval after the last;
// a zero mag means none (6D).
func (f *Madgwick) Update(gyr, acc, mag r3.Vec) { f.UpdateDt(f.dt, gyr, acc, mag) }

// UpdateDt processes one sample taken dt seconds after the last.
func (f *Madgwick) UpdateDt(dt float64, gyr, acc, mag r3.Vec) {
	if f.init {
		f.q = initialOrientation(acc, mag)
		f.init = false
	}
	q0, q1, q2, q3 := f.q.Real, f.q.Imag, f.q.Jmag, f.q.Kmag
	// ½·q ⊗ (0, ω)
	d0 := 0.5 * (-q1*gyr.X - q2*gyr.Y - q3*gyr.Z)
	d1 := 0.5 * (q0*gyr.X + q2*gyr.Z - q3*gyr.Y)
	d2 := 0.5 * (q0*gyr.Y - q1*gyr.Z + q3*gyr.X)
	d3 := 0.5 * (q0*gyr.Z + q1*gyr.Y - q2*gyr.X)
	if acc != (r3.Vec{}) {
		a := r3.Scale(1/r3.Norm(acc), acc)
		// Gravity objective f_g = Rᵀ·ẑ − a and its Jacobian J_g (Madgwick
		// 2010, eqs. 25–26); the step is J_gᵀ·f_g (+ J_bᵀ·f_b).
		fg := [3]float64{2*(q1*q3-q0*q2) - a.X, 2*(q0*q1+q2*q3) - a.Y, 1 - 2*(q1*q1+q2*q2) - a.Z}
		s := [4]float64{
			-2*q2*fg[0] + 2*q1*fg[1],
			2*q3*fg[0] + 2*q0*fg[1] - 4*q1*fg[2],
			-2*q0*fg[0] + 2*q3*fg[1] - 4*q2*fg[2],
			2*q1*fg[0] + 2*q2*fg[1],
		}
		if mag != (r3.Vec{}) {
			m := r3.Scale(1/r3.Norm(mag), mag)
			// The field in the world frame h = R·m, its reference
			// b = (|h_xy|, 0, h_z) used at half scale as in the reference
			// code: B = |h_xy|, Z = h_z below stand for 2·b_x, 2·b_z of
			// Madgwick 2010, eqs. 29–31.
			h := rotateBy(q0, q1, q2, q3, m)
			B := math.Hypot(h.X, h.Y)
			Z := h.Z
			fb := [3]float64{
				B*(0.5-q2*q2-q3*q3) + Z*(q1*q3-q0*q2) - m.X,
				B*(q1*q2-q0*q3) + Z*(q0*q1+q2*q3) - m.Y,
				B*(q0*q2+q1*q3) + Z*(0.5-q1*q1-q2*q2) - m.Z,
			}
			s[0] += -Z*q2*fb[0] + (-B*q3+Z*q1)*fb[1] + B*q2*fb[2]
			s[1] += Z*q3*fb[0] + (B*q2+Z*q0)*fb[1] + (B*q3-2*Z*q1)*fb[2]
			s[2] += (-2*B*q2-Z*q0)*fb[0] + (B*q1+Z*q3)*fb[1] + (B*q0-2*Z*q2)*fb[2]
			s[3] += (-2*B*q3+Z*q1)*fb[0] + (-B*q0+Z*q2)*fb[1] + B*q1*fb[2]
		}
		if n := math.Sqrt(s[0]*s[0] + s[1]*s[1] + s[2]*s[2] + s[3]*s[3]); n > 0 {
			k := f.Beta / n
			d0 -= k * s[0]
			d1 -= k * s[1]
			d2 -= k * s[2]
			d3 -= k * s[3]
		}
	}
	f.q = normalized(q0+d0*dt, q1+d1*dt, q2+d2*dt, q3+d3*dt)
}

// Mahony is the explicit complementary filter of R. Mahony, T. Hamel and
// J.-M. Pflimlin ("Nonlinear complementary filters on the special
// orthogonal group", IEEE Trans. Automatic Control 53(5), 2008): the
// gyroscope rate plus Kp·e (+ Ki·∫e), e the cross product of measured and
// predicted gravity (and field) directions, integrated by Euler's method.
type Mahony struct {
	// Kp and Ki are the proportional (rad/s) and integral (rad/s²) gains.
	Kp, Ki   float64
	dt       float64
	q        quat.Number
	integral r3.Vec
	init     bool
}

// NewMahony returns a Mahony filter with gains kp and ki for samples dt
// seconds apart; initFromFirst as for NewMadgwick.
func NewMahony(kp, ki, dt float64, initFromFirst bool) *Mahony {
	return &Mahony{Kp: kp, Ki: ki, dt: dt, q: quat.Number{Real: 1}, init: initFromFirst}
}

// Quat returns the orientation, sensor → world (NWU).
func (f *Mahony) Quat() quat.Number { return f.q }

// Update processes one sample taken the nominal interval after the last;
// a zero mag means none (6D).
func (f *Mahony) Update(gyr, acc, mag r3.Vec) { f.UpdateDt(f.dt, gyr, acc, mag) }

// UpdateDt processes one sample taken dt seconds after the last.
func (f *Mahony) UpdateDt(dt float64, gyr, acc, mag r3.Vec) {
	if f.init {
		f.q = initialOrientation(acc, mag)
		f.init = false
	}
	q0, q1, q2, q3 := f.q.Real, f.q.Imag, f.q.Jmag, f.q.Kmag
	g := gyr
	// The reference code skips the correction when any accelerometer
	// component is exactly zero.
	if acc.X != 0 && acc.Y != 0 && acc.Z != 0 {
		a := r3.Scale(1/r3.Norm(acc), acc)
		// Half the predicted gravity direction in the sensor frame, Rᵀ·ẑ/2.
		v := r3.Vec{X: q1*q3 - q0*q2, Y: q0*q1 + q2*q3, Z: q0*q0 - 0.5 + q3*q3}
		e := r3.Cross(a, v)
		if mag != (r3.Vec{}) {
			m := r3.Scale(1/r3.Norm(mag), mag)
			h := rotateBy(q0, q1, q2, q3, m)
			bx, bz := math.Hypot(h.X, h.Y), h.Z
			// Half the predicted field direction, Rᵀ·(b_x, 0, b_z)/2.
			w := r3.Vec{
				X: bx*(0.5-q2*q2-q3*q3) + bz*(q1*q3-q0*q2),
				Y: bx*(q1*q2-q0*q3) + bz*(q0*q1+q2*q3),
				Z: bx*(q0*q2+q1*q3) + bz*(0.5-q1*q1-q2*q2),
			}
			e = r3.Add(e, r3.Cross(m, w))
		}
		if f.Ki > 0 {
			f.integral = r3.Add(f.integral, r3.Scale(2*f.Ki*dt, e))
			g = r3.Add(g, f.integral)
		} else {
			f.integral = r3.Vec{}
		}
		g = r3.Add(g, r3.Scale(2*f.Kp, e))
	}
	g = r3.Scale(0.5*dt, g)
	f.q = normalized(
		q0-q1*g.X-q2*g.Y-q3*g.Z,
		q1+q0*g.X+q2*g.Z-q3*g.Y,
		q2+q0*g.Y-q1*g.Z+q3*g.X,
		q3+q0*g.Z+q1*g.Y-q2*g.X,
	)
}

// initialOrientation is the starting orientation the reference code
// derives from one sample: pitch = −atan2(a_x, √(a_y² + a_z²)), roll from
// the accelerometer's y–z direction, heading = −atan2 of the tilt
// compensated field, composed as Z-Y-X (heading, pitch, roll).
func initialOrientation(a, m r3.Vec) quat.Number {
	pitch := -math.Atan2(a.X, math.Sqrt(a.Y*a.Y+a.Z*a.Z))
	// (x̂ × (a × x̂)) is a's projection on the y–z plane.
	roll := math.Atan2(a.Y, a.Z)
	sr, cr := math.Sincos(roll)
	sp, cp := math.Sincos(pitch)
	yh := m.Y*cr - m.Z*sr
	xh := m.X*cp + m.Y*sr*sp + m.Z*cr*sp
	heading := -math.Atan2(yh, xh)
	sy, cy := math.Sincos(heading / 2)
	sp2, cp2 := math.Sincos(pitch / 2)
	sr2, cr2 := math.Sincos(roll / 2)
	return normalized(
		cr2*cp2*cy+sr2*sp2*sy,
		sr2*cp2*cy-cr2*sp2*sy,
		cr2*sp2*cy+sr2*cp2*sy,
		cr2*cp2*sy-sr2*sp2*cy,
	)
}

// rotateBy returns R(q)·v for the unit quaternion (q0, q1, q2, q3).
func rotateBy(q0, q1, q2, q3 float64, v r3.Vec) r3.Vec {
	return r3.Vec{
		X: 2 * (v.X*(0.5-q2*q2-q3*q3) + v.Y*(q1*q2-q0*q3) + v.Z*(q1*q3+q0*q2)),
		Y: 2 * (v.X*(q1*q2+q0*q3) + v.Y*(0.5-q1*q1-q3*q3) + v.Z*(q2*q3-q0*q1)),
		Z: 2 * (v.X*(q1*q3-q0*q2) + v.Y*(q2*q3+q0*q1) + v.Z*(0.5-q1*q1-q2*q2)),
	}
}

func normalized(w, x, y, z float64) quat.Number {
	k := 1 / math.Sqrt(w*w+x*x+y*y+z*z)
	return quat.Number{Real: w * k, Imag: x * k, Jmag: y * k, Kmag: z * k}
}
