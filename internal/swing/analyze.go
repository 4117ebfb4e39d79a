package swing

import (
	"fmt"
	"math"
	"sort"
	"strings"

	"gonum.org/v1/gonum/num/quat"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/kinematics"
	"github.com/kinchain/kinchain/internal/rot"
)

// Options tune Analyze. The zero value analyses a right-handed player and
// derives the target line from the pelvis (else thorax) heading at address.
type Options struct {
	// Handedness of the player; unspecified means right-handed.
	Handedness kinchainv1.Handedness
	// TargetHeading, when non-nil, is the world heading of the direction
	// toward the target, rad counter-clockwise from world +x about +z; it
	// overrides the heading derived from the pelvis.
	TargetHeading *float64
}

// Segment shorthands.
const (
	pelvis    = kinchainv1.Segment_SEGMENT_PELVIS
	thorax    = kinchainv1.Segment_SEGMENT_THORAX
	leadArm   = kinchainv1.Segment_SEGMENT_LEAD_UPPER_ARM
	leadFore  = kinchainv1.Segment_SEGMENT_LEAD_FOREARM
	leadHand  = kinchainv1.Segment_SEGMENT_LEAD_HAND
	clubSeg   = kinchainv1.Segment_SEGMENT_CLUB
	noSegment = kinchainv1.Segment_SEGMENT_UNSPECIFIED
)

// driverOrder lists the segments that can drive the event detection, most
// distal first: top and impact come from the first one present.
var driverOrder = []kinchainv1.Segment{clubSeg, leadHand, leadFore, leadArm}

// Drivers returns the segments that can drive the event detection, most
// distal first: club, lead hand, lead forearm, lead upper arm. Analyze
// takes the first one present (and the next when it yields no swing); the
// live detector of internal/stream the first one a stream declares. The
// slice is a fresh copy.
func Drivers() []kinchainv1.Segment {
	return append([]kinchainv1.Segment(nil), driverOrder...)
}

// chain is the kinetic chain of the sequence checks and gains.
var chain = []kinchainv1.Segment{pelvis, thorax, leadArm, leadHand, clubSeg}

// seg is one present segment with its detection levels.
type seg struct {
	ks *kinematics.Segment
	id kinchainv1.Segment
	// mag is |ω|, rad/s: detection uses the magnitude whatever speed
	// definition the sequence reports.
	mag []float64
	// still is the speed below which the segment counts as still, onset
	// the lower level that marks the first movement, rad/s.
	still, onset float64
}

// analysis holds the state of one Analyze call.
type analysis struct {
	k        *kinematics.Result
	opt      Options
	left     bool
	n        int
	dt       float64
	segs     []*seg
	bySeg    map[kinchainv1.Segment]*seg
	driver   *seg
	limits   Criteria
	swings   []*swingResult
	warnings []*kinchainv1.Warning
	// scratch holds reusable series buffers.
	scratch [4][]float64
}

// buffers returns two scratch slices of length n from pair k (0 or 1); they
// stay valid until the next call with the same k.
func (a *analysis) buffers(k, n int) ([]float64, []float64) {
	for i := 2 * k; i < 2*k+2; i++ {
		if cap(a.scratch[i]) < n {
			a.scratch[i] = make([]float64, n)
		}
	}
	return a.scratch[2*k][:n], a.scratch[2*k+1][:n]
}

// Analyze finds the swings in a capture's kinematics and reports each one:
// events, per-segment transitions, the kinematic sequence, gains, tempo and
// the posture at each event. Movements that look like swing attempts but
// fail the swing criteria (waggles, half swings) are reported as
// WARNING_CODE_SWING_REJECTED warnings; a capture without the pelvis or
// thorax, or without any of lead upper arm, lead hand and club, gets one
// WARNING_CODE_SEGMENTS_MISSING warning and no swings. The package comment
// and DEVELOPERS.md define every event and threshold.
func Analyze(k *kinematics.Result, opt Options) ([]*kinchainv1.SwingReport, []*kinchainv1.Warning) {
	a := &analysis{k: k, opt: opt, left: opt.Handedness == kinchainv1.Handedness_HANDEDNESS_LEFT,
		bySeg: map[kinchainv1.Segment]*seg{}}
	if k == nil || k.Grid.N < 3 || !(k.Grid.Rate > 0) {
		return nil, []*kinchainv1.Warning{{Code: kinchainv1.WarningCode_WARNING_CODE_SEGMENTS_MISSING,
			Message: "swing analysis: no samples"}}
	}
	a.n, a.dt = k.Grid.N, k.Grid.Dt()
	for i := range k.Segments {
		ks := &k.Segments[i]
		if len(ks.Q) != a.n || len(ks.Omega) != a.n || len(ks.Speed) != a.n ||
			(ks.Valid != nil && len(ks.Valid) != a.n) || a.bySeg[ks.Segment] != nil {
			continue
		}
		s := &seg{ks: ks, id: ks.Segment, mag: ks.Speed}
		if k.Speed != kinchainv1.SpeedDefinition_SPEED_DEFINITION_MAGNITUDE {
			s.mag = make([]float64, a.n)
			for i, w := range ks.Omega {
				s.mag[i] = norm(w)
			}
		}
		a.segs = append(a.segs, s)
		a.bySeg[s.id] = s
	}
	sort.Slice(a.segs, func(i, j int) bool { return a.segs[i].id < a.segs[j].id })
	if w := a.checkSegments(); w != nil {
		return nil, []*kinchainv1.Warning{w}
	}
	for _, s := range a.segs {
		a.levels(s)
	}
	// The most distal present driver decides; when it yields no swing
	// (a hand whose frame follows the forearm's twist more than the hand,
	// say), the next one is tried, and the first driver's rejections stand
	// when none yields a swing.
	var firstWarnings []*kinchainv1.Warning
	first := true
	for _, d := range driverOrder {
		s := a.bySeg[d]
		if s == nil {
			continue
		}
		a.driver, a.limits = s, CriteriaFor(d)
		a.swings, a.warnings = nil, nil
		for _, ep := range a.episodes() {
			a.episode(ep[0], ep[1], 0)
		}
		if len(a.swings) > 0 {
			break
		}
		if first {
			firstWarnings, first = a.warnings, false
		}
		a.warnings = firstWarnings
	}
	sort.Slice(a.swings, func(i, j int) bool { return a.swings[i].top < a.swings[j].top })
	reports := make([]*kinchainv1.SwingReport, 0, len(a.swings))
	for i, sw := range a.swings {
		reports = append(reports, a.report(i, sw))
	}
	sort.SliceStable(a.warnings, func(i, j int) bool { return a.warnings[i].GetTimeS() < a.warnings[j].GetTimeS() })
	return reports, a.warnings
}

// checkSegments picks the driver, or returns the SEGMENTS_MISSING warning.
func (a *analysis) checkSegments() *kinchainv1.Warning {
	hasTrunk := a.bySeg[pelvis] != nil || a.bySeg[thorax] != nil
	hasDistal := a.bySeg[leadArm] != nil || a.bySeg[leadHand] != nil || a.bySeg[clubSeg] != nil
	if hasTrunk && hasDistal {
		for _, d := range driverOrder {
			if s := a.bySeg[d]; s != nil {
				a.driver = s
				return nil
			}
		}
	}
	var names []string
	for _, s := range a.segs {
		names = append(names, segName(s.id))
	}
	present := "none"
	if len(names) > 0 {
		present = strings.Join(names, ", ")
	}
	return &kinchainv1.Warning{Code: kinchainv1.WarningCode_WARNING_CODE_SEGMENTS_MISSING,
		Message: fmt.Sprintf("swing analysis needs the pelvis or thorax and at least one of lead_upper_arm, lead_hand, club; present: %s", present)}
}

// segName returns the short name of a segment ("lead_hand").
func segName(s kinchainv1.Segment) string {
	return strings.ToLower(strings.TrimPrefix(s.String(), "SEGMENT_"))
}

func (a *analysis) time(i int) float64 { return a.k.Grid.Time(i) }

func (s *seg) valid(i int) bool { return s.ks.Valid == nil || s.ks.Valid[i] }

// at returns the orientation of s at time t (slerp between neighbouring
// samples), and whether both are valid.
func (a *analysis) at(s *seg, t float64) (quat.Number, bool) {
	u := (t - a.k.Grid.Start) / a.dt
	i := int(math.Floor(u))
	if i < 0 || i >= a.n-1 {
		i = max(0, min(a.n-1, i))
		return s.ks.Q[i], s.valid(i)
	}
	f := u - float64(i)
	return rot.Slerp(s.ks.Q[i], s.ks.Q[i+1], f), s.valid(i) && s.valid(i+1)
}

// speedAt returns the speed of s at time t by linear interpolation, rad/s.
func (a *analysis) speedAt(s *seg, t float64) float64 {
	u := (t - a.k.Grid.Start) / a.dt
	i := int(math.Floor(u))
	if i < 0 || i >= a.n-1 {
		return s.ks.Speed[max(0, min(a.n-1, i))]
	}
	f := u - float64(i)
	return s.ks.Speed[i]*(1-f) + s.ks.Speed[i+1]*f
}

// frameAt returns the target-line frame for an address at sample i.
func (a *analysis) frameAt(i int) frame {
	if a.opt.TargetHeading != nil {
		return newFrame(headingFromTarget(*a.opt.TargetHeading, a.left), a.left)
	}
	s := a.bySeg[pelvis]
	if s == nil {
		s = a.bySeg[thorax]
	}
	return newFrame(rot.Heading(s.ks.Q[i]), a.left)
}

// report builds the message of one accepted swing.
func (a *analysis) report(index int, sw *swingResult) *kinchainv1.SwingReport {
	r := &kinchainv1.SwingReport{
		Index:                 int32(index),
		TargetFrameHeadingDeg: deg(sw.f.heading),
		Tempo: &kinchainv1.Tempo{
			BackswingS: sw.top - sw.takeaway,
			DownswingS: sw.impact - sw.top,
		},
	}
	r.Tempo.Ratio = r.Tempo.BackswingS / r.Tempo.DownswingS
	for _, e := range sw.events {
		r.Events = append(r.Events, &kinchainv1.Event{Kind: e.kind, TimeS: e.t})
	}
	for _, s := range a.segs {
		if t, ok := sw.transitions[s.id]; ok {
			r.Transitions = append(r.Transitions, &kinchainv1.Transition{
				Segment: s.id, TimeS: t, TimeFromTopMs: (t - sw.top) * 1000,
			})
		}
	}
	seq := a.sequence(sw)
	r.Sequence = seq.rows
	r.PeakOrder = seq.order
	r.ProximalToDistal = seq.proximalToDistal
	r.Gains = seq.gains
	r.Postures = a.postures(sw)
	return r
}

func deg(r float64) float64 { return r * 180 / math.Pi }
func rad(d float64) float64 { return d * math.Pi / 180 }
