package synth

import (
	"fmt"
	"math"
)

// A piece is one smooth contribution to an angle channel. It is zero before
// its span, smooth inside it and constant (its net change) after it, so a
// channel is the sum of its pieces. Angles are in rad, times in s.
type piece interface {
	// eval returns the value and its first and second time derivatives
	// (rad, rad/s, rad/s²) at t.
	eval(t float64) (v, d, dd float64)
}

// minJerk is the minimum-jerk (quintic) ramp of delta rad over [t0, t1]:
// v = delta·(10τ³ − 15τ⁴ + 6τ⁵), τ = (t − t0)/(t1 − t0). Velocity and
// acceleration are zero at both ends (Flash & Hogan, J. Neurosci. 5(7),
// 1985).
type minJerk struct {
	t0, t1, delta float64
}

func (m minJerk) eval(t float64) (v, d, dd float64) {
	switch {
	case t <= m.t0:
		return 0, 0, 0
	case t >= m.t1:
		return m.delta, 0, 0
	}
	D := m.t1 - m.t0
	u := (t - m.t0) / D
	u2 := u * u
	v = m.delta * u2 * u * (10 - 15*u + 6*u2)
	d = m.delta / D * 30 * u2 * (1 - u) * (1 - u)
	dd = m.delta / (D * D) * 60 * u * (1 - u) * (1 - 2*u)
	return v, d, dd
}

// drive is the main angle of a segment through one swing, built from its
// angular velocity in three closed-form pieces (all angles in rad, positive
// toward the target):
//
//	backswing  t0 < t ≤ T:  ω = −(A/Db)·β(τ),  τ = (t−t0)/Db, Db = T−t0,
//	           β(τ) = (1−λ)·30τ²(1−τ)² + λ·π·τ·sin(πτ)          (∫β = 1)
//	rise       T < t ≤ P:  ω = V·[(1−cos πσ)/2 + κ·σ(1−σ)²],    σ = (t−T)/Dr
//	fall       P < t ≤ F:  ω = V·(1+cos πμ)/2,                  μ = (t−P)/Df
//
// The backswing turns the segment by −A and stops with a finite angular
// acceleration s_T = λπ²A/Db², so the reversal at T is a clean sign change;
// κ = s_T·Dr/V makes the acceleration continuous at T. The rise reaches the
// peak speed V at P with zero acceleration, and the fall brings the segment
// to rest at F. Angular velocity and acceleration are continuous everywhere.
type drive struct {
	t0, T, P, F float64
	A, V        float64
	lambda      float64
	kappa       float64
}

// newDrive designs a drive. With amp > 0 the backswing amplitude is amp;
// with amp == 0 it is solved so that the angle returns to zero (the address
// value) at time zero (the return time). fin is the angle at rest after the
// follow-through. It returns an error when the design is infeasible.
func newDrive(t0, T, P, V, amp, zero, fin float64) (drive, error) {
	dr := drive{t0: t0, T: T, P: P, V: V}
	if !(t0 < T && T < P && V > 0) {
		return dr, fmt.Errorf("drive needs start < transition < peak and a positive speed (got %.4f, %.4f, %.4f, %g)", t0, T, P, V)
	}
	set := func(A float64) error {
		dr.A = A
		Db, Dr := T-t0, P-T
		// λ = 0.5 unless that would make the rise's start too steep (κ ≤ 1).
		dr.lambda = math.Min(0.5, V*Db*Db/(A*math.Pi*math.Pi*Dr))
		sT := dr.lambda * math.Pi * math.Pi * A / (Db * Db)
		dr.kappa = sT * Dr / V
		thetaP := dr.thetaP()
		if !(fin > thetaP) {
			return fmt.Errorf("finish angle %.1f° not beyond the angle at peak speed %.1f°", deg(fin), deg(thetaP))
		}
		dr.F = P + 2*(fin-thetaP)/V
		return nil
	}
	if amp > 0 {
		return dr, set(amp)
	}
	if !(zero > T) {
		return dr, fmt.Errorf("return time %.4f not after the transition %.4f", zero, T)
	}
	// Bisection on A: the angle at the return time falls as A grows.
	lo, hi := 1e-3, 4*math.Pi
	f := func(A float64) (float64, error) {
		if err := set(A); err != nil {
			return 0, err
		}
		v, _, _ := dr.eval(zero)
		return v, nil
	}
	flo, err := f(lo)
	if err != nil {
		return dr, err
	}
	fhi, err := f(hi)
	if err != nil {
		return dr, err
	}
	if flo <= 0 || fhi >= 0 {
		return dr, fmt.Errorf("no backswing amplitude returns to address at %.4f s", zero)
	}
	for i := 0; i < 200 && hi-lo > 1e-14; i++ {
		mid := (lo + hi) / 2
		fm, err := f(mid)
		if err != nil {
			return dr, err
		}
		if fm > 0 {
			lo = mid
		} else {
			hi = mid
		}
	}
	return dr, set((lo + hi) / 2)
}

// thetaP returns the angle at peak speed: −A + V·Dr·(1/2 + κ/12).
func (dr drive) thetaP() float64 {
	return -dr.A + dr.V*(dr.P-dr.T)*(0.5+dr.kappa/12)
}

// final returns the angle at rest after the follow-through.
func (dr drive) final() float64 {
	return dr.thetaP() + dr.V*(dr.F-dr.P)/2
}

func (dr drive) eval(t float64) (v, d, dd float64) {
	switch {
	case t <= dr.t0:
		return 0, 0, 0
	case t <= dr.T:
		Db := dr.T - dr.t0
		u := (t - dr.t0) / Db
		s, c := math.Sincos(math.Pi * u)
		l := dr.lambda
		u2 := u * u
		B := (1-l)*u2*u*(10-15*u+6*u2) + l*(s/math.Pi-u*c)
		beta := (1-l)*30*u2*(1-u)*(1-u) + l*math.Pi*u*s
		dbeta := (1-l)*60*u*(1-u)*(1-2*u) + l*math.Pi*(s+math.Pi*u*c)
		return -dr.A * B, -dr.A / Db * beta, -dr.A / (Db * Db) * dbeta
	case t <= dr.P:
		Dr := dr.P - dr.T
		u := (t - dr.T) / Dr
		s, c := math.Sincos(math.Pi * u)
		k := dr.kappa
		u2 := u * u
		R := u/2 - s/(2*math.Pi) + k*(u2/2-2*u2*u/3+u2*u2/4)
		r := (1-c)/2 + k*u*(1-u)*(1-u)
		dr1 := math.Pi/2*s + k*(1-4*u+3*u2)
		return -dr.A + dr.V*Dr*R, dr.V * r, dr.V / Dr * dr1
	case t <= dr.F:
		Df := dr.F - dr.P
		u := (t - dr.P) / Df
		s, c := math.Sincos(math.Pi * u)
		return dr.thetaP() + dr.V*Df*(u/2+s/(2*math.Pi)), dr.V * (1 + c) / 2, -dr.V / Df * math.Pi / 2 * s
	default:
		return dr.final(), 0, 0
	}
}

// there is a ramp of delta over [t0, tm] and back over [tm, t1] (a waggle):
// the sum of two minimum-jerk ramps, net change zero.
type there struct {
	out, back minJerk
}

func newThere(t0, tm, t1, delta float64) there {
	return there{out: minJerk{t0, tm, delta}, back: minJerk{tm, t1, -delta}}
}

func (w there) eval(t float64) (v, d, dd float64) {
	v1, d1, dd1 := w.out.eval(t)
	v2, d2, dd2 := w.back.eval(t)
	return v1 + v2, d1 + d2, dd1 + dd2
}

// channel is an angle as a constant plus the sum of pieces.
type channel struct {
	base   float64
	pieces []piece
}

func (c *channel) eval(t float64) (v, d, dd float64) {
	v = c.base
	for _, p := range c.pieces {
		pv, pd, pdd := p.eval(t)
		v += pv
		d += pd
		dd += pdd
	}
	return v, d, dd
}

// value returns the channel's value at t.
func (c *channel) value(t float64) float64 {
	v, _, _ := c.eval(t)
	return v
}

func rad(d float64) float64 { return d * math.Pi / 180 }
func deg(r float64) float64 { return r * 180 / math.Pi }
