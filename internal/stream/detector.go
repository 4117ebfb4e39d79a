package stream

import (
	"math"

	"gonum.org/v1/gonum/num/quat"
	"gonum.org/v1/gonum/spatial/r3"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/rot"
	"github.com/kinchain/kinchain/internal/swing"
)

// Parameters of the causal detector and of the analysis window. All are our
// choices (see DEVELOPERS.md, "Live streams"). What the live events share
// with the batch analysis comes from the swing package itself, so that the
// two cannot drift apart: the still, onset, merge and finish levels (swing.StillFloor
// and the rest), the swing criteria (swing.CriteriaFor), the driver order
// (swing.Drivers) and the pointer axis (swing.PointerAxis).
const (
	// PreRoll is how much stream time before a swing's first movement its
	// analysis window starts, s. The batch analysis looks 0.3 s before the
	// movement for the address and needs the still level of a quiet
	// stretch; 1 s covers both and the zero-phase filter's start-up.
	PreRoll = 1.0
	// PostRoll is how much stream time after the finish is decided the
	// window ends (and the report waits), s: room for the zero-phase
	// filter's edge effects past the batch finish search.
	PostRoll = 0.5
	// MaxBackswing bounds the time from a movement's start to its top, s.
	MaxBackswing = 4.0
	// MaxDownswing bounds the time from the top to impact, s.
	MaxDownswing = 1.5
	// MaxFollowThrough bounds the time from impact to the finish, s; a
	// swing whose finish is not seen by then is reported without one.
	MaxFollowThrough = 2.5
	// PlaneAngle is how far the driver's pointer must have turned from its
	// address direction before the live swing plane is fixed, rad (20°).
	PlaneAngle = 20 * math.Pi / 180
	// TopConfirmAngle is how far the driver must have turned back toward
	// the target past its extreme before the top is reported, rad (1°).
	TopConfirmAngle = 1 * math.Pi / 180
	// QuietBlock is the span of stream time, s, over which the live quiet
	// level is kept: the lowest swing.QuietWindow mean speed of the current
	// and the previous block (a stream has no end to take the lowest over,
	// as the swing package does over its span).
	QuietBlock = 10.0
	// LiveCutoffFraction: the live detector's low-pass cutoff is this
	// fraction of the analysis cutoff (10 Hz for the default 20 Hz). A
	// causal second-order filter passes far more of the differenced noise
	// than the analysis's zero-phase (fourth-order) one at the same cutoff;
	// at half the cutoff its still level stays near the analysis's in noisy
	// data, at the price of 22 ms of group delay (tau), which the event
	// times are corrected by.
	LiveCutoffFraction = 0.5
)

// phase is the detector's state.
type phase uint8

const (
	phIdle   phase = iota // no movement, or movement that is not (yet) a swing
	phBack                // moving: backswing candidate, top not yet decided
	phDown                // top decided: downswing, impact not yet decided
	phFollow              // impact decided: follow-through, finish level not reached
	phSettle              // finish level reached, waiting for the speed to stop falling
)

// decisionKind says what a decision is.
type decisionKind uint8

const (
	decEvent    decisionKind = iota // an event of the current swing
	decComplete                     // the swing is over: analyse [t0, t1]
)

// decision is one output of the detector.
type decision struct {
	kind  decisionKind
	event kinchainv1.EventKind
	t, at float64 // event time; stream time of the deciding sample
	// For decComplete: the analysis window and the live impact time.
	t0, t1, impact float64
	finished       bool
}

// crossingAt returns the fraction u in [0, 1] at which the line from y0 to
// y1 passes level (linear interpolation of a sampled crossing), as the
// swing package interpolates its crossings.
func crossingAt(y0, y1, level float64) float64 {
	if y1 == y0 {
		return 0
	}
	return math.Max(0, math.Min(1, (level-y0)/(y1-y0)))
}

// wrapAngle returns x wrapped into (−π, π].
func wrapAngle(x float64) float64 {
	x = math.Mod(x, 2*math.Pi)
	if x > math.Pi {
		x -= 2 * math.Pi
	} else if x <= -math.Pi {
		x += 2 * math.Pi
	}
	return x
}

// armCrossing is a moment the lead upper arm's long axis passed
// horizontal.
type armCrossing struct {
	t  float64 // the crossing, s
	at float64 // the arm sample that revealed it, s
	up bool    // going up (backswing), else coming down
}

// armHistory is the number of arm crossings remembered.
const armHistory = 8

// detector is the causal swing detector of one stream. It runs on the
// driver's samples one at a time, in O(1) time and memory per sample, and
// appends its decisions to out.
//
// Signals: the driver's angular velocity by backward difference of its
// orientation, ω_k = 2·log(q_k ⊗ q_{k−1}*)/Δt (world frame; for raw
// inertial tracks the gyroscope, with the orientation integrated from it),
// through the causal low-pass; its magnitude v is the speed. φ is the
// in-plane angle of the driver's pointer (its −z axis) from its address
// direction, in the plane fixed by the first PlaneAngle of movement and
// signed so that the backswing is negative; its rate dφ/dt comes from the
// filtered angular velocity (angleRate). Times derived from filtered
// signals are moved earlier by the filter's group delay tau; impact comes
// from the unfiltered φ and needs no correction.
type detector struct {
	seg      kinchainv1.Segment
	crit     swing.Criteria
	gyroOnly bool
	axis     r3.Vec // the pointer in the sensor frame
	gapBound float64
	lpW      causal
	filtered bool
	tau      float64 // group delay of the low-pass at 0 Hz, s

	have  bool
	tPrev float64
	qPrev quat.Number
	gPrev r3.Vec
	vPrev float64

	// Quiet level: the lowest mean speed over any QuietWindow in the
	// current and the previous QuietBlock of stream time.
	qwin         []float64
	qpos, qcnt   int
	qsum, quiet  float64
	qblock       [2]float64 // lowest window mean in the previous and current block
	qblockStart  float64
	still, onset float64
	lastStill    float64
	qStill       quat.Number

	// The current rise above the onset level: where it began (takeaway and
	// address estimates) and the orientation just before it.
	aboveOnset     bool
	upTake, upAddr float64
	qOnset, qUp    quat.Number

	ph         phase
	start      float64 // first moving sample of the candidate
	lastMoving float64
	p0, e1, e2 r3.Vec
	planeOK    bool
	phi        float64
	rate       float64
	phiMin     float64
	peak       float64

	inRun              bool
	runTake, runAddr   float64
	runQ               quat.Number // orientation at the run's address sample
	haveCand           bool        // a fast backward sample was seen
	takeCand, addrCand float64     // the run holding the last fast backward sample
	candQ              quat.Number
	pPlane             r3.Vec      // the pointer that fixed the plane
	qBegin             quat.Number // orientation at the last still sample before the candidate
	topTent            bool
	topT               float64
	topAt              float64 // when the top was decided
	takeaway, address  float64
	impact             float64
	impactKnown        bool
	impactSent         bool
	settleFrom         float64
	armUpSent, armDown bool

	arm  [armHistory]armCrossing
	narm int // crossings recorded (the ring keeps the last armHistory)

	out []decision
}

// newDetector returns a detector for driver segment seg at the nominal rate
// Hz. axis is the pointer in the sensor frame; cutoff the low-pass cutoff,
// Hz (0: unfiltered).
func newDetector(seg kinchainv1.Segment, rate, cutoff float64, axis r3.Vec, gyroOnly bool, gapBound float64) (*detector, error) {
	d := &detector{seg: seg, crit: swing.CriteriaFor(seg), gyroOnly: gyroOnly, axis: axis, gapBound: gapBound,
		quiet: math.Inf(1), qblock: [2]float64{math.Inf(1), math.Inf(1)}}
	if cutoff > 0 {
		var err error
		if d.lpW, err = newCausal(2, cutoff, rate); err != nil {
			return nil, err
		}
		d.filtered = true
		d.tau = groupDelay(&d.lpW) / rate
	}
	d.qwin = make([]float64, max(3, int(math.Round(swing.QuietWindow*rate))))
	d.levels()
	return d, nil
}

// groupDelay returns the group delay at 0 Hz of f's cascade, samples: for
// each section B(z)/A(z), Σk·b_k/Σb_k − Σk·a_k/Σa_k (the derivative of the
// phase of a rational transfer function at ω = 0).
func groupDelay(f *causal) float64 {
	g := 0.0
	for i := 0; i < f.n; i++ {
		s := f.sec[i]
		g += (s[1]+2*s[2])/(s[0]+s[1]+s[2]) - (s[4]+2*s[5])/(s[3]+s[4]+s[5])
	}
	return g
}

// levels sets the still and onset levels from the quiet level, as the
// swing package does (swing.StillFloor, StillFactor, OnsetFloor,
// OnsetFactor); before a full quiet window the floors apply.
func (d *detector) levels() {
	q := d.quiet
	if math.IsInf(q, 1) {
		q = 0
	}
	d.still = math.Max(swing.StillFloor, swing.StillFactor*q)
	d.onset = math.Max(swing.OnsetFloor, swing.OnsetFactor*q)
}

// setAxis changes the pointer (a new mounting); it takes effect at the next
// candidate.
func (d *detector) setAxis(axis r3.Vec) {
	if d.ph == phIdle {
		d.axis = axis
	}
}

// emit records an event decision.
func (d *detector) emit(k kinchainv1.EventKind, t, at float64) {
	d.out = append(d.out, decision{kind: decEvent, event: k, t: t, at: at})
}

// abandon ends the candidate without a swing.
func (d *detector) abandon(t float64, q quat.Number) {
	d.ph = phIdle
	d.lastStill, d.qStill = t, q
}

// complete ends the swing and asks for its analysis.
func (d *detector) complete(t float64, finished bool) {
	d.out = append(d.out, decision{kind: decComplete, t0: d.start - PreRoll, t1: t + PostRoll,
		impact: d.impact, finished: finished, at: t})
	d.ph = phIdle
}

// stepGyro feeds one sample of a raw inertial driver: the gyroscope g in
// the sensor frame, rad/s. The orientation is integrated from it
// (q_k = q_{k−1} ⊗ exp(ḡ·Δt/2), ḡ the mean of the two readings) in a frame
// fixed at the first sample; only orientation changes matter to the
// detector.
func (d *detector) stepGyro(t float64, g r3.Vec) {
	if !d.have {
		d.gPrev = g
		d.step(t, rot.Identity)
		return
	}
	dt := t - d.tPrev
	avg := r3.Scale(0.5, r3.Add(g, d.gPrev))
	d.gPrev = g
	q, _ := rot.Normalize(rot.Mul(d.qPrev, rot.FromRotVec(r3.Scale(dt, avg))))
	d.step(t, q)
}

// step feeds one sample of the driver: time t s, orientation q (unit,
// sensor frame → world).
func (d *detector) step(t float64, q quat.Number) {
	if !d.have {
		d.have, d.tPrev, d.qPrev = true, t, q
		d.lastStill, d.qStill, d.qOnset = t, q, q
		return
	}
	dt := t - d.tPrev
	if dt > d.gapBound {
		// A gap: the difference across it is no angular velocity. Restart
		// the filters; a backswing candidate does not survive it.
		d.lpW.reset()
		d.tPrev, d.qPrev = t, q
		if d.ph == phBack {
			d.abandon(t, q)
		}
		return
	}
	w := rot.ToRotVec(rot.Mul(q, rot.Conj(d.qPrev)))
	x := [3]float64{w.X / dt, w.Y / dt, w.Z / dt}
	if d.filtered {
		d.lpW.step(&x, 3)
	}
	v := math.Sqrt(x[0]*x[0] + x[1]*x[1] + x[2]*x[2])
	d.quietUpdate(t, v)
	p := rot.Rotate(q, d.axis)
	tPrev, vPrev, qLast := d.tPrev, d.vPrev, d.qPrev
	d.tPrev, d.qPrev, d.vPrev = t, q, v

	if v <= d.onset {
		d.aboveOnset, d.qOnset = false, q
	} else if !d.aboveOnset {
		d.aboveOnset = true
		d.upTake = tPrev + dt*crossingAt(vPrev, v, d.onset) - d.tau
		d.upAddr = tPrev - d.tau
		d.qUp = d.qOnset
	}

	phiPrev, ratePrev := d.phi, d.rate
	if d.ph == phIdle {
		if v <= d.still {
			d.lastStill, d.qStill = t, q
			return
		}
		d.begin(t, v, p)
		phiPrev = d.phi
	} else {
		d.angle(p)
	}
	d.rate = d.angleRate(p, r3.Vec{X: x[0], Y: x[1], Z: x[2]}, v)
	d.phiMin = math.Min(d.phiMin, d.phi)
	d.peak = math.Max(d.peak, v)
	if v > d.still {
		d.lastMoving = t
	}

	switch d.ph {
	case phBack:
		d.backswing(t, tPrev, v, vPrev, ratePrev, q, qLast)
	case phDown:
		if phiPrev < 0 && d.phi >= 0 {
			d.impact = tPrev + dt*crossingAt(phiPrev, d.phi, 0)
			d.impactKnown = true
			d.ph = phFollow
			if d.peak >= d.crit.PeakSpeed {
				d.impactSent = true
				d.emit(kinchainv1.EventKind_EVENT_KIND_IMPACT, d.impact, t)
			}
			d.armCheck(t)
			return
		}
		d.armCheck(t)
		if t-d.topT > MaxDownswing {
			d.abandon(t, q)
		}
	case phFollow:
		if !d.impactSent && d.peak >= d.crit.PeakSpeed {
			d.impactSent = true
			d.emit(kinchainv1.EventKind_EVENT_KIND_IMPACT, d.impact, t)
		}
		d.armCheck(t)
		if v <= math.Max(swing.FinishStillFactor*d.still, swing.FinishFraction*d.peak) {
			d.ph = phSettle
			d.settleFrom = t
		} else if t-d.impact > MaxFollowThrough {
			d.followTimeout(t, q)
		}
	case phSettle:
		// The finish is the last sample of the fall below the finish
		// level, at most FinishSettle after the first.
		if v < vPrev && t-d.settleFrom <= swing.FinishSettle {
			return
		}
		if !d.impactSent {
			d.abandon(t, q)
			return
		}
		fin := math.Min(tPrev, d.settleFrom+swing.FinishSettle) - d.tau
		d.emit(kinchainv1.EventKind_EVENT_KIND_FINISH, fin, t)
		d.complete(t, true)
	}
}

// followTimeout ends a follow-through that found no finish.
func (d *detector) followTimeout(t float64, q quat.Number) {
	if d.impactSent {
		d.complete(t, false)
		return
	}
	d.abandon(t, q)
}

// begin starts a candidate at the first moving sample (speed v, pointer
// p): the address direction is the pointer's just before the speed rose
// through the onset level, and that rise starts the first backward run.
func (d *detector) begin(t, v float64, p r3.Vec) {
	d.ph = phBack
	d.start, d.lastMoving = t, t
	q0 := d.qStill
	d.qBegin = d.qStill
	d.inRun, d.haveCand = d.aboveOnset, false
	if d.aboveOnset {
		q0 = d.qUp
		d.runTake, d.runAddr, d.runQ = d.upTake, d.upAddr, d.qUp
	}
	d.p0 = rot.Rotate(q0, d.axis)
	d.planeOK = false
	d.phi, d.rate, d.phiMin, d.peak = 0, 0, 0, v
	d.angle(p)
	d.phiMin = math.Min(0, d.phi)
	d.topTent = false
	d.impactKnown, d.impactSent = false, false
	d.armUpSent, d.armDown = false, false
}

// angle updates φ for pointer p.
func (d *detector) angle(p r3.Vec) {
	if !d.planeOK {
		c := math.Max(-1, math.Min(1, r3.Dot(p, d.p0)))
		ang := math.Acos(c)
		d.phi = -ang
		if ang >= PlaneAngle {
			// Fix the plane through p0 and p, signed so that this first
			// movement is negative: n = (p × p0)/|p × p0|, e2 = n × p0.
			n := r3.Cross(p, d.p0)
			if nn := r3.Norm(n); nn > 1e-9 {
				n = r3.Scale(1/nn, n)
				d.e1 = d.p0
				d.e2 = r3.Cross(n, d.p0)
				d.planeOK = true
				d.pPlane = p
			}
		}
		return
	}
	a := math.Atan2(r3.Dot(p, d.e2), r3.Dot(p, d.e1))
	d.phi += wrapAngle(a - wrapAngle(d.phi))
}

// angleRate returns dφ/dt for pointer p turning with angular velocity w
// (rad/s) at speed v: with ṗ = w × p and φ = atan2(p·e2, p·e1),
//
//	dφ/dt = ((ṗ·e2)(p·e1) − (ṗ·e1)(p·e2)) / ((p·e1)² + (p·e2)²),
//
// 0 where p is within 0.1° of the plane's normal. Before the plane is
// fixed the movement counts as backward (−v), since the plane is then
// chosen so that it is.
func (d *detector) angleRate(p, w r3.Vec, v float64) float64 {
	if !d.planeOK {
		return -v
	}
	a, b := r3.Dot(p, d.e1), r3.Dot(p, d.e2)
	den := a*a + b*b
	if den < 3e-6 {
		return 0
	}
	pd := r3.Cross(w, p)
	return (r3.Dot(pd, d.e2)*a - r3.Dot(pd, d.e1)*b) / den
}

// reanchor measures φ from the pointer at the takeaway's address sample
// (orientation qa) from now on: the plane through it and the pointer that
// fixed the first plane, the same construction as in angle. φ is carried
// over continuously from its current value for pointer p.
func (d *detector) reanchor(qa quat.Number, p r3.Vec) {
	p0 := rot.Rotate(qa, d.axis)
	n := r3.Cross(d.pPlane, p0)
	nn := r3.Norm(n)
	if nn < 1e-9 {
		return
	}
	n = r3.Scale(1/nn, n)
	d.p0, d.e1, d.e2 = p0, p0, r3.Cross(n, p0)
	a := math.Atan2(r3.Dot(p, d.e2), r3.Dot(p, d.e1))
	d.phi += wrapAngle(a - wrapAngle(d.phi))
}

// backswing runs the backswing phase for the sample at t (orientation q,
// the previous sample's qLast).
func (d *detector) backswing(t, tPrev, v, vPrev, ratePrev float64, q, qLast quat.Number) {
	// The takeaway is where the run of backward movement faster than the
	// onset level that holds the last sample turning backward faster than
	// the still level began: the swing package walks back from the top to
	// the same place.
	back := v > d.onset && d.rate < 0
	if back && !d.inRun {
		d.inRun = true
		d.runAddr = tPrev - d.tau
		d.runTake = tPrev + (t-tPrev)*crossingAt(vPrev, v, d.onset) - d.tau
		d.runQ = qLast
	} else if !back {
		d.inRun = false
	}
	if d.inRun && d.rate <= -d.still {
		d.haveCand = true
		d.takeCand, d.addrCand, d.candQ = d.runTake, d.runAddr, d.runQ
	}
	switch {
	case ratePrev <= 0 && d.rate > 0 && d.haveCand:
		// A reversal from backward to forward: a tentative top.
		d.topTent = true
		d.topT = tPrev + (t-tPrev)*crossingAt(ratePrev, d.rate, 0) - d.tau
		d.takeaway, d.address = d.takeCand, d.addrCand
	case d.topTent && d.rate <= 0:
		d.topTent = false
	}
	if d.topTent && d.rate >= d.still && d.phi-d.phiMin >= TopConfirmAngle {
		d.topTent = false
		if -d.phiMin >= d.crit.Amplitude {
			d.ph = phDown
			d.topAt = t
			// The address direction: at the takeaway's address sample when
			// that run began before the candidate (clean data), else at the
			// last still sample before it (in noise the run can break and
			// start late, after the pointer has moved).
			qa := d.qBegin
			if d.takeCand <= d.start {
				qa = d.candQ
			}
			d.reanchor(qa, rot.Rotate(q, d.axis))
			d.emit(kinchainv1.EventKind_EVENT_KIND_ADDRESS, d.address, t)
			d.emit(kinchainv1.EventKind_EVENT_KIND_TAKEAWAY, d.takeaway, t)
			d.armCheck(t)
			d.emit(kinchainv1.EventKind_EVENT_KIND_TOP, d.topT, t)
			return
		}
	}
	switch {
	case t-d.lastMoving > swing.MergeGap:
		// Still for longer than the swing package merges: the movement is
		// over without a top.
		d.abandon(t, q)
	case t-d.start > MaxBackswing:
		d.abandon(t, q)
	}
}

// quietUpdate adds speed v at time t to the sliding quiet window. The
// swing package takes the lowest window mean over the span it analyses;
// a stream has no end, so the live level is the lowest over the current
// and the previous QuietBlock, which keeps it near the level the window
// analysis will see and lets it follow a change of noise (a sensor
// re-mounted) in a long session.
func (d *detector) quietUpdate(t, v float64) {
	if t-d.qblockStart >= QuietBlock {
		d.qblock[0], d.qblock[1] = d.qblock[1], math.Inf(1)
		d.qblockStart = t
		if q := d.qblock[0]; q != d.quiet {
			d.quiet = q
			d.levels()
		}
	}
	w := len(d.qwin)
	if d.qcnt == w {
		d.qsum -= d.qwin[d.qpos]
	} else {
		d.qcnt++
	}
	d.qwin[d.qpos] = v
	d.qsum += v
	d.qpos++
	if d.qpos == w {
		d.qpos = 0
	}
	if d.qcnt == w {
		m := d.qsum / float64(w)
		d.qblock[1] = math.Min(d.qblock[1], m)
		if m < d.quiet {
			d.quiet = m
			d.levels()
		}
	}
}

// addArm records a lead-arm crossing and emits what it completes.
func (d *detector) addArm(c armCrossing) {
	d.arm[d.narm%armHistory] = c
	d.narm++
	if d.have {
		d.armCheck(d.tPrev)
	}
}

// armCheck emits the lead-arm events that the crossings revealed by arm
// samples up to stream time now complete: the first upward crossing
// between the candidate's start and its top (once the top is decided), and
// the first downward crossing after the top and not after impact. An
// event's detection time is the later of the arm sample that revealed it
// and the top's decision, whichever segment's samples arrive first.
func (d *detector) armCheck(now float64) {
	if d.ph < phDown || d.narm == 0 {
		return
	}
	first := max(0, d.narm-armHistory)
	if !d.armUpSent {
		for i := first; i < d.narm; i++ {
			c := d.arm[i%armHistory]
			if c.up && c.at <= now && c.t >= d.start-d.tau && c.t <= d.topT {
				d.armUpSent = true
				d.emit(kinchainv1.EventKind_EVENT_KIND_LEAD_ARM_LEVEL_BACKSWING, c.t, math.Max(c.at, d.topAt))
				break
			}
		}
	}
	if !d.armDown {
		for i := first; i < d.narm; i++ {
			c := d.arm[i%armHistory]
			if !c.up && c.at <= now && c.t > d.topT && (!d.impactKnown || c.t <= d.impact) {
				d.armDown = true
				d.emit(kinchainv1.EventKind_EVENT_KIND_LEAD_ARM_LEVEL_DOWNSWING, c.t, math.Max(c.at, d.topAt))
				break
			}
		}
	}
}

// finishAtClose ends a swing in progress when the stream closes: one with
// a reported impact is analysed up to the end of the stream.
func (d *detector) finishAtClose() {
	if (d.ph == phFollow || d.ph == phSettle) && d.impactSent {
		d.out = append(d.out, decision{kind: decComplete, t0: d.start - PreRoll, t1: math.Inf(1),
			impact: d.impact, at: d.tPrev})
		d.ph = phIdle
	}
}
