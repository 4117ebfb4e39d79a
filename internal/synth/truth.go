package synth

import (
	"math"
	"sort"

	"gonum.org/v1/gonum/num/quat"
	"gonum.org/v1/gonum/spatial/r3"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/rot"
)

// PeakWindowAfterImpact is how far past impact the downswing window of the
// peak search reaches, s: the window the swing package uses (a segment's
// window runs from the earlier of the top and its own transition to 100 ms
// after impact).
const PeakWindowAfterImpact = 0.100

// truthStep is the grid step of the fine searches over the closed form, s.
const truthStep = 20e-6

// Truth is the ground truth of a synthetic capture, computed from the
// closed-form model, never from the samples. Times are capture times in s,
// angles in degrees, speeds in °/s (magnitude of the angular velocity).
type Truth struct {
	// Model is the model that generated the capture.
	Model *Model
	// Handedness of the player.
	Handedness kinchainv1.Handedness
	// TargetFrameHeadingDeg is the heading of the target-line frame's x
	// axis in the world, degrees counter-clockwise from world +x.
	TargetFrameHeadingDeg float64
	// Swings holds the full swings in time order.
	Swings []SwingTruth
	// Rejected lists the movements that are not swings (waggles, half
	// swings), in time order.
	Rejected []MovementTruth
	// Gaps lists the dropouts cut into the tracks.
	Gaps []GapTruth
	// Mountings holds each sensor's mounting (sensor frame in the segment
	// frame) when Config.MountingDeg is set.
	Mountings map[kinchainv1.Segment]quat.Number
}

// SwingTruth is the truth of one full swing. Right-handed readings: for a
// left-handed player every value is that of the mirrored capture.
type SwingTruth struct {
	// Address is the last still moment before the takeaway; Takeaway the
	// first movement (the club, hands and lead forearm start together).
	Address, Takeaway float64
	// Top is the club's reversal from backswing to downswing.
	Top float64
	// Impact: the club's angle in the swing plane returns to its address
	// value.
	Impact float64
	// Finish is the time the club comes to rest after the follow-through.
	Finish float64
	// LeadArmLevelBackswing and LeadArmLevelDownswing are the times the
	// lead upper arm's long axis is horizontal, going up and coming down.
	LeadArmLevelBackswing, LeadArmLevelDownswing float64
	// Transitions holds each segment's own reversal: the sign change of
	// its turning rate about the target-line vertical (pelvis, thorax,
	// head) or of its long axis's rate in its swing plane (the others).
	Transitions map[kinchainv1.Segment]float64
	// Returns holds, for every segment but pelvis, thorax and head, the
	// time its long axis returns to its address angle in its swing plane
	// during the downswing: the impact as read from that segment when the
	// club is absent.
	Returns map[kinchainv1.Segment]float64
	// Rest holds the time each segment comes to rest after the swing.
	Rest map[kinchainv1.Segment]float64
	// Peaks holds each segment's peak speed in its downswing window (see
	// PeakWindowAfterImpact).
	Peaks map[kinchainv1.Segment]Peak
	// Tempo of the swing.
	Tempo Tempo
	// Pelvis and Thorax are the Z-Y'-X'' Cardan angles in the target-line
	// frame at address, top and impact.
	Pelvis, Thorax Postures
	// PeakOrder lists all ten segments by peak time.
	PeakOrder []kinchainv1.Segment
	// ProximalToDistal reports that pelvis, thorax, lead upper arm, lead
	// hand and club peak in that order, each faster than the last.
	ProximalToDistal bool
}

// Peak is one segment's peak speed.
type Peak struct {
	SpeedDegPerS         float64
	TimeS                float64
	SpeedAtImpactDegPerS float64
}

// Tempo is backswing (takeaway → top) and downswing (top → impact), s.
type Tempo struct {
	BackswingS, DownswingS, Ratio float64
}

// BodyAngles are intrinsic Z-Y'-X” Cardan angles in the target-line frame,
// degrees: axial rotation (positive toward the target), flexion (positive
// forward), lateral bend (positive toward the trail side).
type BodyAngles struct {
	AxialRotationDeg, FlexionDeg, LateralBendDeg float64
}

// Postures are a segment's angles at three events.
type Postures struct {
	Address, Top, Impact BodyAngles
}

// MovementTruth is a movement the analysis should reject.
type MovementTruth struct {
	// Kind is "waggle" or "half swing".
	Kind string
	// Start is the first motion, Top the club's reversal, End the time all
	// is still again, s.
	Start, Top, End float64
	// ClubAmplitudeDeg is the club's backswing angle in the swing plane.
	ClubAmplitudeDeg float64
}

// GapTruth is one dropout: samples of Segment with Start < t < End were
// removed.
type GapTruth struct {
	Segment    kinchainv1.Segment
	Start, End float64
}

// truth computes the ground truth of the model's timeline.
func (m *Model) truth() *Truth {
	tr := &Truth{Model: m, Handedness: m.cfg.Handedness, TargetFrameHeadingDeg: deg(m.psi)}
	for _, mv := range m.plan {
		switch mv.kind {
		case moveFull:
			tr.Swings = append(tr.Swings, m.swingTruth(mv.swing))
		case moveWaggle:
			tr.Rejected = append(tr.Rejected, MovementTruth{Kind: "waggle", Start: mv.start, Top: mv.top, End: mv.end,
				ClubAmplitudeDeg: WaggleAmplitude})
		case moveHalf:
			tr.Rejected = append(tr.Rejected, MovementTruth{Kind: "half swing", Start: mv.start, Top: mv.top, End: mv.end,
				ClubAmplitudeDeg: deg(mv.swing.drives[club].A)})
		}
	}
	return tr
}

func (m *Model) swingTruth(sw *swingDesign) SwingTruth {
	st := SwingTruth{
		Address: sw.takeaway, Takeaway: sw.takeaway, Top: sw.top, Impact: sw.impact,
		Finish:      sw.drives[club].F,
		Transitions: map[kinchainv1.Segment]float64{},
		Returns:     map[kinchainv1.Segment]float64{},
		Rest:        map[kinchainv1.Segment]float64{},
		Peaks:       map[kinchainv1.Segment]Peak{},
	}
	st.Tempo = Tempo{BackswingS: sw.top - sw.takeaway, DownswingS: sw.impact - sw.top}
	st.Tempo.Ratio = st.Tempo.BackswingS / st.Tempo.DownswingS
	for _, s := range AllSegments {
		dr := sw.drives[s]
		st.Transitions[s] = dr.T
		st.Rest[s] = dr.F
		if !m.specs[s].body {
			st.Returns[s] = bisect(func(t float64) float64 { v, _, _ := dr.eval(t); return v }, dr.T, dr.F)
		}
		st.Peaks[s] = m.peak(s, math.Min(sw.top, dr.T), sw.impact+PeakWindowAfterImpact, sw.impact)
	}
	// The lead upper arm's long axis (−z) is horizontal.
	level := func(t float64) float64 {
		q, _, _ := m.local(leadArm, t)
		return rot.Rotate(q, r3.Vec{Z: -1}).Z
	}
	arm := sw.drives[leadArm]
	st.LeadArmLevelBackswing = firstRoot(level, arm.t0, arm.T)
	st.LeadArmLevelDownswing = firstRoot(level, arm.T, sw.impact)
	st.Pelvis = m.postures(pelvis, sw)
	st.Thorax = m.postures(thorax, sw)

	st.PeakOrder = append([]kinchainv1.Segment(nil), AllSegments...)
	sort.SliceStable(st.PeakOrder, func(i, j int) bool {
		return st.Peaks[st.PeakOrder[i]].TimeS < st.Peaks[st.PeakOrder[j]].TimeS
	})
	st.ProximalToDistal = true
	chain := []kinchainv1.Segment{pelvis, thorax, leadArm, leadHand, club}
	for i := 1; i < len(chain); i++ {
		a, b := st.Peaks[chain[i-1]], st.Peaks[chain[i]]
		if b.TimeS < a.TimeS || b.SpeedDegPerS <= a.SpeedDegPerS {
			st.ProximalToDistal = false
		}
	}
	return st
}

func (m *Model) postures(s kinchainv1.Segment, sw *swingDesign) Postures {
	at := func(t float64) BodyAngles {
		ch := m.segs[s].chans
		return BodyAngles{deg(ch[0].value(t)), deg(ch[1].value(t)), deg(ch[2].value(t))}
	}
	return Postures{Address: at(sw.takeaway), Top: at(sw.top), Impact: at(sw.impact)}
}

// peak returns the maximum of |ω| of s over [a, b], found on a 20 µs grid
// and refined by golden-section search, and the speed at impact.
func (m *Model) peak(s kinchainv1.Segment, a, b, impact float64) Peak {
	speed := func(t float64) float64 {
		_, w, _ := m.local(s, t)
		return r3.Norm(w)
	}
	best, bt := -1.0, a
	n := int(math.Ceil((b - a) / truthStep))
	for i := 0; i <= n; i++ {
		t := math.Min(a+float64(i)*truthStep, b)
		if v := speed(t); v > best {
			best, bt = v, t
		}
	}
	lo, hi := math.Max(a, bt-truthStep), math.Min(b, bt+truthStep)
	const g = 0.6180339887498949
	for i := 0; i < 60; i++ {
		x1 := hi - g*(hi-lo)
		x2 := lo + g*(hi-lo)
		if speed(x1) >= speed(x2) {
			hi = x2
		} else {
			lo = x1
		}
	}
	if t := (lo + hi) / 2; speed(t) > best {
		best, bt = speed(t), t
	}
	return Peak{SpeedDegPerS: deg(best), TimeS: bt, SpeedAtImpactDegPerS: deg(speed(impact))}
}

// bisect returns the root of f in [a, b], where f(a) and f(b) differ in
// sign, to 1e-12 s; NaN when they do not.
func bisect(f func(float64) float64, a, b float64) float64 {
	fa, fb := f(a), f(b)
	if fa == 0 {
		return a
	}
	if fb == 0 {
		return b
	}
	if (fa > 0) == (fb > 0) {
		return math.NaN()
	}
	for i := 0; i < 200 && b-a > 1e-12; i++ {
		c := (a + b) / 2
		fc := f(c)
		if (fc > 0) == (fa > 0) {
			a, fa = c, fc
		} else {
			b = c
		}
	}
	return (a + b) / 2
}

// firstRoot returns the first sign change of f in [a, b], located on a
// 0.5 ms scan and refined by bisection; NaN when there is none.
func firstRoot(f func(float64) float64, a, b float64) float64 {
	const step = 0.5e-3
	prev := f(a)
	for t := a; t < b; {
		next := math.Min(t+step, b)
		v := f(next)
		if (prev < 0) != (v < 0) {
			return bisect(f, t, next)
		}
		t, prev = next, v
	}
	return math.NaN()
}
