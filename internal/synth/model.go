package synth

import (
	"fmt"
	"math"
	"math/rand/v2"

	"gonum.org/v1/gonum/num/quat"
	"gonum.org/v1/gonum/spatial/r3"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/rot"
)

// Gravity is the standard acceleration of gravity g₀, m/s² (CGPM 1901).
const Gravity = 9.80665

// element is one factor of a segment's orientation in the target-line
// frame: a constant rotation, or a rotation by a channel's angle about a
// fixed axis of the frame reached so far (intrinsic composition).
type element struct {
	axis  r3.Vec   // unit axis, in the frame reached so far
	ch    *channel // nil: constant
	fixed quat.Number
}

// segModel is one segment of the model.
type segModel struct {
	seg   kinchainv1.Segment
	spec  *spec
	elems []element
	// The channels (body: axial, flexion, lateral bend; swing plane: drive,
	// roll).
	chans []*channel
}

// Model is the model golfer: closed-form orientation, angular velocity and
// sensor acceleration of every segment at any time. Create it with
// NewModel; Generate samples it.
type Model struct {
	cfg   Config
	specs map[kinchainv1.Segment]*spec
	segs  [club + 1]*segModel
	// n is the swing-plane normal in the right-handed target-line frame:
	// the club shaft's address direction × y_T, normalised.
	n r3.Vec
	// psi is the heading of the target-line frame's x axis in the world,
	// rad; yaw the rotation by psi about world z.
	psi  float64
	yaw  quat.Number
	left bool
	// plan is the timeline.
	plan    []movement
	swings  []*swingDesign
	end     float64 // last time of the capture, s
	shockAt []float64
	shock   float64
}

// movement kinds on the timeline.
type movementKind int

const (
	moveWaggle movementKind = iota
	moveHalf
	moveFull
)

type movement struct {
	kind   movementKind
	start  float64 // first motion, s
	top    float64 // reversal of the club, s
	end    float64 // at rest again, s
	swing  *swingDesign
	impact float64
}

// swingDesign holds the designed drives of one (full or half) swing.
type swingDesign struct {
	takeaway, top, impact float64
	drives                map[kinchainv1.Segment]drive
	rest                  map[kinchainv1.Segment]float64 // time each segment comes to rest
	scale                 float64
}

// NewModel builds the model golfer for cfg (defaults filled in).
func NewModel(cfg Config) (*Model, error) {
	c, err := cfg.resolved()
	if err != nil {
		return nil, err
	}
	m := &Model{cfg: c, specs: defaultSpecs(), left: c.Handedness == kinchainv1.Handedness_HANDEDNESS_LEFT}
	applyFaults(m.specs, &c)
	m.specs[thorax].flex[0] = c.ThoraxFlexionDeg
	// Thorax flexion later in the swing keeps its designed change from
	// address.
	for i := 1; i < 4; i++ {
		m.specs[thorax].flex[i] += c.ThoraxFlexionDeg - DefaultThoraxFlexion
	}
	p := unit(m.specs[club].pointer)
	m.n = unit(r3.Cross(p, r3.Vec{Y: 1}))

	// Heading of x_T: the target is +y_T for a right-hander and −y_T for a
	// left-hander (the mirror image).
	target := rad(c.TargetHeadingDeg)
	if m.left {
		m.psi = wrapPi(target + math.Pi/2)
	} else {
		m.psi = wrapPi(target - math.Pi/2)
	}
	m.yaw = rot.YawRotation(m.psi)

	for _, s := range AllSegments {
		sp := m.specs[s]
		sm := &segModel{seg: s, spec: sp}
		if sp.body {
			ax, fl, lb := &channel{}, &channel{base: rad(sp.flex[0])}, &channel{base: rad(sp.lat[0])}
			sm.chans = []*channel{ax, fl, lb}
			sm.elems = []element{{axis: r3.Vec{Z: 1}, ch: ax}, {axis: r3.Vec{Y: 1}, ch: fl}, {axis: r3.Vec{X: 1}, ch: lb}}
		} else {
			dr, rl := &channel{}, &channel{}
			sm.chans = []*channel{dr, rl}
			sm.elems = []element{{axis: m.n, ch: dr}, {fixed: pointerFrame(sp.pointer, sp.xref)}, {axis: r3.Vec{Z: 1}, ch: rl}}
		}
		m.segs[s] = sm
	}
	if err := m.buildTimeline(); err != nil {
		return nil, err
	}
	return m, nil
}

// pointerFrame returns the orientation whose −z axis is pointer and whose x
// axis is xref made perpendicular to it.
func pointerFrame(pointer, xref r3.Vec) quat.Number {
	z := r3.Scale(-1, unit(pointer))
	x := unit(r3.Sub(xref, r3.Scale(r3.Dot(xref, z), z)))
	y := r3.Cross(z, x)
	return rot.FromMatrix([3][3]float64{
		{x.X, y.X, z.X},
		{x.Y, y.Y, z.Y},
		{x.Z, y.Z, z.Z},
	})
}

func unit(v r3.Vec) r3.Vec { return r3.Scale(1/r3.Norm(v), v) }

func wrapPi(x float64) float64 {
	x = math.Mod(x, 2*math.Pi)
	if x > math.Pi {
		x -= 2 * math.Pi
	} else if x <= -math.Pi {
		x += 2 * math.Pi
	}
	return x
}

// buildTimeline lays out waggles, half swings and full swings.
func (m *Model) buildTimeline() error {
	c := &m.cfg
	rng := rand.New(rand.NewPCG(uint64(c.Seed), 0x5eed5))
	t := c.StartTime + c.LeadIn
	for i := 0; i < c.Waggles; i++ {
		tm, t1 := t+waggleTime/2, t+waggleTime
		for _, s := range AllSegments {
			if w := m.specs[s].waggle; w > 0 {
				ch := m.segs[s].chans[0]
				ch.pieces = append(ch.pieces, newThere(t, tm, t1, -rad(WaggleAmplitude*w)))
			}
		}
		m.plan = append(m.plan, movement{kind: moveWaggle, start: t, top: tm, end: t1})
		t = t1 + waggleStill
	}
	for i := 0; i < c.HalfSwings; i++ {
		sw, err := m.addSwing(t, HalfSwingScale, 1)
		if err != nil {
			return fmt.Errorf("synth: half swing %d: %w", i, err)
		}
		end := m.addReturn(sw)
		m.plan = append(m.plan, movement{kind: moveHalf, start: sw.takeaway, top: sw.top, impact: sw.impact, end: maxRest(sw), swing: sw})
		t = end + c.Pause
	}
	for i := 0; i < c.Swings; i++ {
		speed := 1.0
		if c.SwingVariation > 0 {
			speed += c.SwingVariation * (2*rng.Float64() - 1)
		}
		sw, err := m.addSwing(t, 1, speed)
		if err != nil {
			return fmt.Errorf("synth: swing %d: %w", i, err)
		}
		m.swings = append(m.swings, sw)
		rest := maxRest(sw)
		m.plan = append(m.plan, movement{kind: moveFull, start: sw.takeaway, top: sw.top, impact: sw.impact, end: rest, swing: sw})
		m.shockAt = append(m.shockAt, sw.impact)
		if i == c.Swings-1 {
			m.end = rest + c.Tail
		} else {
			t = m.addReturn(sw) + c.Pause
		}
	}
	if c.Duration > 0 {
		need := m.end - c.StartTime
		if c.Duration < need {
			return fmt.Errorf("synth: Config.Duration = %g: the timeline needs %.3f s", c.Duration, need)
		}
		m.end = c.StartTime + c.Duration
	}
	m.shock = c.ImpactShock
	return nil
}

func maxRest(sw *swingDesign) float64 {
	r := 0.0
	for _, v := range sw.rest {
		r = math.Max(r, v)
	}
	return r
}

// addSwing adds one swing whose takeaway is at t0, with amplitudes and
// speeds scaled by scale and speeds further by speed.
func (m *Model) addSwing(t0, scale, speed float64) (*swingDesign, error) {
	c := &m.cfg
	k := c.Downswing / DefaultDownswing // time scale
	top := t0 + c.Tempo*c.Downswing
	imp := top + c.Downswing
	sw := &swingDesign{takeaway: t0, top: top, impact: imp, scale: scale,
		drives: map[kinchainv1.Segment]drive{}, rest: map[kinchainv1.Segment]float64{}}
	for _, s := range AllSegments {
		sp := m.specs[s]
		start := t0 + k*sp.start
		T := top + k*sp.trans
		P := imp + k*sp.peak
		V := rad(sp.speed) * scale * speed / k
		amp := rad(sp.amp) * scale
		dr, err := newDrive(start, T, P, V, amp, imp+k*sp.returnAt, rad(sp.finish)*scale)
		if err != nil {
			return nil, fmt.Errorf("%v: %w", s, err)
		}
		sw.drives[s] = dr
		sw.rest[s] = dr.F
		sm := m.segs[s]
		sm.chans[0].pieces = append(sm.chans[0].pieces, dr)
		if sp.body {
			keyed(sm.chans[1], sp.flex, start, T, P, dr.F, scale)
			keyed(sm.chans[2], sp.lat, start, T, P, dr.F, scale)
		} else {
			keyed(sm.chans[1], [4]float64{0, sp.roll[0], sp.roll[1], sp.roll[2]}, start, T, P, dr.F, scale)
		}
	}
	return sw, nil
}

// keyed adds minimum-jerk ramps through the keyframes v (degrees; the
// changes from v[0] are scaled by scale) at the times start, T (the
// segment's transition), P (its peak speed) and F (its rest). The ramps
// stand still at P, so the secondary angles add nothing to the speed
// there and the drive's peak V at P is the segment's peak speed.
func keyed(ch *channel, v [4]float64, start, T, P, F, scale float64) {
	ts := [4]float64{start, T, P, F}
	for i := 0; i < 3; i++ {
		ch.pieces = append(ch.pieces, minJerk{ts[i], ts[i+1], rad(v[i+1]-v[i]) * scale})
	}
}

// addReturn adds the movement from the finish back to address after sw and
// returns the time it ends.
func (m *Model) addReturn(sw *swingDesign) float64 {
	r0 := maxRest(sw) + finishHold
	r1 := r0 + returnTime
	for _, s := range AllSegments {
		for _, ch := range m.segs[s].chans {
			if d := ch.value(r0) - ch.base; d != 0 {
				ch.pieces = append(ch.pieces, minJerk{r0, r1, -d})
			}
		}
	}
	return r1
}

// local returns the orientation of segment s in the right-handed
// target-line frame and its angular velocity and acceleration in that frame
// (rad/s, rad/s²), by the chain rule over the elements:
// ω = Σ θ̇ᵢ aᵢ and α = Σ (θ̈ᵢ aᵢ + θ̇ᵢ ω₍<ᵢ₎ × aᵢ), aᵢ the i-th axis carried
// into the target-line frame by the rotations before it.
func (m *Model) local(s kinchainv1.Segment, t float64) (q quat.Number, w, a r3.Vec) {
	q = rot.Identity
	for _, e := range m.segs[s].elems {
		if e.ch == nil {
			q = rot.Mul(q, e.fixed)
			continue
		}
		v, d, dd := e.ch.eval(t)
		ax := rot.Rotate(q, e.axis)
		a = r3.Add(a, r3.Add(r3.Scale(dd, ax), r3.Scale(d, r3.Cross(w, ax))))
		w = r3.Add(w, r3.Scale(d, ax))
		q = rot.Mul(q, rot.FromAxisAngle(e.axis, v))
	}
	return q, w, a
}

// mirrorQ maps an orientation in the target-line frame to its mirror image
// through the x–z plane: R' = M R M, M = diag(1, −1, 1), which for a
// quaternion is (w, x, y, z) → (w, −x, y, −z).
func mirrorQ(q quat.Number) quat.Number {
	return quat.Number{Real: q.Real, Imag: -q.Imag, Jmag: q.Jmag, Kmag: -q.Kmag}
}

// mirrorAxial maps an angular velocity (a pseudovector) to its mirror
// image: ω' = −M ω = (−x, y, −z).
func mirrorAxial(v r3.Vec) r3.Vec { return r3.Vec{X: -v.X, Y: v.Y, Z: -v.Z} }

// mirrorPolar maps a position or acceleration to its mirror image: M v.
func mirrorPolar(v r3.Vec) r3.Vec { return r3.Vec{X: v.X, Y: -v.Y, Z: v.Z} }

// Orientation returns the orientation of segment s (segment frame → world)
// at time t, s.
func (m *Model) Orientation(s kinchainv1.Segment, t float64) quat.Number {
	q, _, _ := m.local(s, t)
	if m.left {
		q = mirrorQ(q)
	}
	return rot.Mul(m.yaw, q)
}

// Omega returns the angular velocity of segment s in the world frame at
// time t, rad/s, from the closed-form derivatives of the model's angles.
func (m *Model) Omega(s kinchainv1.Segment, t float64) r3.Vec {
	_, w, _ := m.local(s, t)
	if m.left {
		w = mirrorAxial(w)
	}
	return rot.Rotate(m.yaw, w)
}

// AngularAcceleration returns dω/dt of segment s in the world frame at
// time t, rad/s².
func (m *Model) AngularAcceleration(s kinchainv1.Segment, t float64) r3.Vec {
	_, _, a := m.local(s, t)
	if m.left {
		a = mirrorAxial(a)
	}
	return rot.Rotate(m.yaw, a)
}

// kinState is a segment's orientation, angular velocity and acceleration in
// the right-handed target-line frame.
type kinState struct {
	q    quat.Number
	w, a r3.Vec
}

// sensorLocal returns the position (m) and linear acceleration (m/s²) of
// segment s's sensor in the right-handed target-line frame. Each segment
// hangs from its parent at its joint; a point fixed in a frame turning
// with ω, α accelerates by α × r + ω × (ω × r) relative to its base.
func (m *Model) sensorLocal(s kinchainv1.Segment, t float64) (p, acc r3.Vec) {
	var chain []kinchainv1.Segment
	for x := s; ; x = m.specs[x].parent {
		chain = append(chain, x)
		if m.specs[x].parent == kinchainv1.Segment_SEGMENT_UNSPECIFIED {
			break
		}
	}
	var parent kinState
	for i := len(chain) - 1; i >= 0; i-- {
		x := chain[i]
		sp := m.specs[x]
		if i == len(chain)-1 {
			p = sp.joint
		} else {
			r := rot.Rotate(parent.q, sp.joint)
			p = r3.Add(p, r)
			acc = r3.Add(acc, rigid(parent.w, parent.a, r))
		}
		q, w, a := m.local(x, t)
		parent = kinState{q, w, a}
	}
	r := rot.Rotate(parent.q, m.specs[s].sensor)
	return r3.Add(p, r), r3.Add(acc, rigid(parent.w, parent.a, r))
}

// rigid returns α × r + ω × (ω × r), the acceleration of a point at r from
// a base point of the same rigid body (relative acceleration on a rigid
// body, e.g. Meriam & Kraige, Engineering Mechanics: Dynamics, ch. 5; from
// memory).
func rigid(w, a, r r3.Vec) r3.Vec {
	return r3.Add(r3.Cross(a, r), r3.Cross(w, r3.Cross(w, r)))
}

// SensorPosition returns the world position of segment s's sensor, m.
func (m *Model) SensorPosition(s kinchainv1.Segment, t float64) r3.Vec {
	p, _ := m.sensorLocal(s, t)
	if m.left {
		p = mirrorPolar(p)
	}
	return rot.Rotate(m.yaw, p)
}

// SensorAcceleration returns the world linear acceleration of segment s's
// sensor, m/s², including the ball-strike shock on the club: a decaying
// oscillation along the face normal's opposite that starts at each impact,
// shock·e^(−Δ/4 ms)·cos(2π·250 Hz·Δ), Δ = t − impact ≥ 0.
func (m *Model) SensorAcceleration(s kinchainv1.Segment, t float64) r3.Vec {
	_, a := m.sensorLocal(s, t)
	if s == club && m.shock > 0 {
		for _, ti := range m.shockAt {
			if d := t - ti; d >= 0 && d < 0.05 {
				q, _, _ := m.local(club, ti)
				face := rot.Rotate(q, r3.Vec{X: 1})
				a = r3.Add(a, r3.Scale(-m.shock*math.Exp(-d/0.004)*math.Cos(2*math.Pi*250*d), face))
			}
		}
	}
	if m.left {
		a = mirrorPolar(a)
	}
	return rot.Rotate(m.yaw, a)
}

// SpecificForce returns what an ideal accelerometer on segment s reads in
// the world frame: acceleration minus gravity, m/s² (+g up at rest).
func (m *Model) SpecificForce(s kinchainv1.Segment, t float64) r3.Vec {
	return r3.Add(m.SensorAcceleration(s, t), r3.Vec{Z: Gravity})
}

// TargetFrameHeading returns the heading of the target-line frame's x axis
// in the world, rad counter-clockwise from world +x.
func (m *Model) TargetFrameHeading() float64 { return m.psi }

// SwingPlaneNormal returns the swing-plane normal of the model in the world
// frame (mirrored for a left-handed player).
func (m *Model) SwingPlaneNormal() r3.Vec {
	n := m.n
	if m.left {
		n = mirrorAxial(n)
	}
	return rot.Rotate(m.yaw, n)
}

// End returns the time of the capture's last sample, s.
func (m *Model) End() float64 { return m.end }

// Config returns the model's configuration with defaults filled in.
func (m *Model) Config() Config { return m.cfg }
