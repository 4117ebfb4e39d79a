package swing

import (
	"fmt"
	"math"
	"sort"
	"strings"

	"gonum.org/v1/gonum/spatial/r3"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/rot"
)

// Detection thresholds. DEVELOPERS.md gives the reasoning; all are our
// choices, tuned on the synthetic model golfer and on slow practice swings
// without a club.
const (
	// QuietWindow is the length of the sliding window whose lowest mean
	// speed is a segment's quiet level (its noise floor at rest), s.
	QuietWindow = 0.25
	// StillFloor and StillFactor: a segment is still when its speed is at
	// most max(StillFloor, StillFactor × quiet level), rad/s (15 °/s).
	StillFloor  = 15 * math.Pi / 180
	StillFactor = 3.0
	// OnsetFloor and OnsetFactor: the first movement of the backswing is
	// where the driver's speed rises through max(OnsetFloor,
	// OnsetFactor × quiet level), rad/s (1 °/s).
	OnsetFloor  = 1 * math.Pi / 180
	OnsetFactor = 1.5
	// MergeGap: movement separated by less than this much stillness, s,
	// belongs to one episode (a pause at the top is shorter).
	MergeGap = 0.2
	// MinEpisode is the shortest movement examined as a candidate, s.
	MinEpisode = 0.1
	// CandidateSpeed and CandidateFactor: a movement is a candidate only
	// when the driver's peak speed reaches max(CandidateSpeed,
	// CandidateFactor × still level), rad/s (100 °/s).
	CandidateSpeed  = 100 * math.Pi / 180
	CandidateFactor = 3.0
	// FinishFraction and FinishStillFactor: after the downswing the finish
	// is where the driver's speed first falls to max(FinishStillFactor ×
	// still level, FinishFraction × its peak) and then stops falling (at
	// most FinishSettle later, s).
	FinishFraction    = 0.10
	FinishStillFactor = 2.0
	FinishSettle      = 0.3
	// TransitionLookback: a segment's transition is searched from this long
	// before the top (the plane is still taken at address), s.
	TransitionLookback = 0.5
	// AddressLookback bounds the search for the still address before the
	// takeaway, s.
	AddressLookback = 2.0
	// DownswingAfterImpact is how far past impact the downswing window of
	// the sequence reaches, s: without a club, impact comes from a limb
	// returning to its address angle, which in slow swings happens tens of
	// ms before the hand peaks.
	DownswingAfterImpact = 0.100
	// ShockWindow, ShockFactor, ShockFloor: the accelerometer refines
	// impact when, within ±ShockWindow s of the angle-based impact, the
	// largest sample-to-sample change of the driver's specific force is at
	// least ShockFactor × its median over the downswing and at least
	// ShockFloor m/s²; impact is then the middle of that sample interval.
	ShockWindow = 0.020
	ShockFactor = 6.0
	ShockFloor  = 50.0
)

// Criteria are the swing criteria of one driver segment: what its
// movement must reach to be analysed as a full swing (a waggle or a half
// swing does not; it gets a SWING_REJECTED warning). The live detector of
// internal/stream applies the same values.
type Criteria struct {
	// Amplitude is the least backswing amplitude −φ(top) of the driver's
	// pointer in its swing plane, rad.
	Amplitude float64
	// PeakSpeed is the least peak speed |ω| of the driver, rad/s.
	PeakSpeed float64
}

// CriteriaFor returns the swing criteria for driver segment d:
//
//	driver           backswing amplitude   peak speed
//	club             150°                  700 °/s
//	lead hand        110°                  500 °/s
//	lead forearm      90°                  400 °/s
//	lead upper arm    75°                  300 °/s
//
// Any other segment gets the lead upper arm's. A half swing turns the club
// about 90°–120° (shaft horizontal or a little past), a waggle 20°–40°; a
// full swing turns it past vertical (180°). The limb thresholds scale down
// with the limb's smaller share of the turn (our choices; common practice,
// no source).
func CriteriaFor(d kinchainv1.Segment) Criteria {
	switch d {
	case clubSeg:
		return Criteria{rad(150), rad(700)}
	case leadHand:
		return Criteria{rad(110), rad(500)}
	case leadFore:
		return Criteria{rad(90), rad(400)}
	default:
		return Criteria{rad(75), rad(300)}
	}
}

// event is one detected moment.
type event struct {
	kind kinchainv1.EventKind
	t    float64
}

// swingResult is one accepted swing.
type swingResult struct {
	f                                   frame
	addrIdx, topIdx, impactIdx, peakIdx int
	finishIdx                           int // −1 without a finish
	address, takeaway, top, impact      float64
	finish                              float64
	amplitude                           float64 // rad
	transitions                         map[kinchainv1.Segment]float64
	transIdx                            map[kinchainv1.Segment]int
	events                              []event
}

// levels sets the still and onset levels of s from its quiet level: the
// lowest mean speed over any QuietWindow of valid samples.
func (a *analysis) levels(s *seg) {
	w := max(3, int(math.Round(QuietWindow/a.dt)))
	quiet := math.Inf(1)
	var sum float64
	cnt := 0
	for i := 0; i < a.n; i++ {
		if s.valid(i) {
			sum += s.mag[i]
			cnt++
		}
		if j := i - w; j >= 0 && s.valid(j) {
			sum -= s.mag[j]
			cnt--
		}
		if i >= w-1 && cnt >= w/2 {
			if m := sum / float64(cnt); m < quiet {
				quiet = m
			}
		}
	}
	if math.IsInf(quiet, 1) {
		// Shorter than one window or mostly invalid: the overall mean.
		sum, cnt = 0, 0
		for i := 0; i < a.n; i++ {
			if s.valid(i) {
				sum += s.mag[i]
				cnt++
			}
		}
		quiet = 0
		if cnt > 0 {
			quiet = sum / float64(cnt)
		}
	}
	quiet = math.Max(quiet, 0)
	s.still = math.Max(StillFloor, StillFactor*quiet)
	s.onset = math.Max(OnsetFloor, OnsetFactor*quiet)
}

// episodes returns the spans [lo, hi] of sample indices in which the driver
// moves (speed above its still level), runs closer than MergeGap merged and
// runs shorter than MinEpisode dropped.
func (a *analysis) episodes() [][2]int {
	d := a.driver
	gap := int(math.Round(MergeGap / a.dt))
	minLen := int(math.Round(MinEpisode / a.dt))
	var runs [][2]int
	start := -1
	for i := 0; i <= a.n; i++ {
		moving := i < a.n && d.valid(i) && d.mag[i] > d.still
		switch {
		case moving && start < 0:
			start = i
		case !moving && start >= 0:
			if len(runs) > 0 && start-runs[len(runs)-1][1] <= gap {
				runs[len(runs)-1][1] = i - 1
			} else {
				runs = append(runs, [2]int{start, i - 1})
			}
			start = -1
		}
	}
	out := runs[:0]
	for _, r := range runs {
		if r[1]-r[0]+1 >= minLen {
			out = append(out, r)
		}
	}
	return out
}

// maxDepth bounds the recursion over the parts of an episode before and
// after a swing.
const maxDepth = 8

// episode examines the driver's movement in [lo, hi]: it finds the fastest
// moment, and when a backswing precedes it, the swing around it; the parts
// before its address and after its finish are examined in turn.
func (a *analysis) episode(lo, hi, depth int) {
	d := a.driver
	if depth > maxDepth || hi-lo+1 < int(math.Round(MinEpisode/a.dt)) {
		return
	}
	pk := -1
	for i := lo; i <= hi; i++ {
		if d.valid(i) && (pk < 0 || d.mag[i] > d.mag[pk]) {
			pk = i
		}
	}
	if pk < 0 || d.mag[pk] < math.Max(CandidateSpeed, CandidateFactor*d.still) {
		return
	}
	// A swing attempt turns one way, then the other way faster: look for
	// motion against the sense of the fastest moment before it (no frame
	// needed). A one-way movement (returning from the finish, picking up
	// the club) is not a candidate.
	npk := unit(d.ks.Omega[pk])
	back := false
	for i := lo; i < pk; i++ {
		if d.valid(i) && r3.Dot(d.ks.Omega[i], npk) <= -d.still {
			back = true
			break
		}
	}
	if !back {
		// The fastest moment may lie in the backswing (a waggle goes out
		// and back equally fast): take the fastest opposite moment after it.
		pk2 := -1
		for i := pk + 1; i <= hi; i++ {
			if d.valid(i) && r3.Dot(d.ks.Omega[i], npk) <= -d.still && (pk2 < 0 || d.mag[i] > d.mag[pk2]) {
				pk2 = i
			}
		}
		if pk2 < 0 {
			return
		}
		pk = pk2
	}
	if lo == 0 {
		a.reject(d.ks.Segment, a.time(pk), fmt.Sprintf("the movement before %.3f s starts before the capture (no still address)", a.time(pk)))
		return
	}
	// Pass 1: a provisional address just before the movement.
	from := max(0, lo-int(math.Round(0.3/a.dt)))
	sw, why := a.detect(from, hi, pk, false)
	if sw == nil {
		a.reject(d.ks.Segment, a.time(pk), why+a.gapNote(from, hi))
		return
	}
	// Pass 2: the frame and plane at the address found.
	sw2, why := a.detect(sw.addrIdx, hi, pk, true)
	end := hi
	if sw2 != nil {
		sw = sw2
		if sw.finishIdx >= 0 {
			end = sw.finishIdx
		}
		if why == "" {
			a.complete(sw)
			a.swings = append(a.swings, sw)
		}
	}
	if why != "" {
		t := a.time(pk)
		if sw2 != nil {
			t = sw2.top
		}
		a.reject(d.ks.Segment, t, why+a.gapNote(sw.addrIdx, end))
	}
	a.episode(lo, sw.addrIdx-1, depth+1)
	a.episode(end+1, hi, depth+1)
}

// reject records a SWING_REJECTED warning.
func (a *analysis) reject(s kinchainv1.Segment, t float64, why string) {
	a.warnings = append(a.warnings, &kinchainv1.Warning{
		Code:    kinchainv1.WarningCode_WARNING_CODE_SWING_REJECTED,
		Segment: s,
		TimeS:   &t,
		Message: fmt.Sprintf("movement at %.3f s not analysed as a swing: %s", t, why),
	})
}

// gapNote returns a note on the first run of invalid driver samples in
// [lo, hi], or "".
func (a *analysis) gapNote(lo, hi int) string {
	d := a.driver
	for i := max(0, lo); i <= min(hi, a.n-1); i++ {
		if d.valid(i) {
			continue
		}
		j := i
		for j+1 <= hi && !d.valid(j+1) {
			j++
		}
		return fmt.Sprintf(" (the %s's data has a gap at %.3f–%.3f s)", segName(d.id), a.time(i), a.time(j))
	}
	return ""
}

// driverSeries returns, for the driver over [from, hi] in frame f with its
// plane at from, the in-plane angle φ (unwrapped, φ(from) = 0) and its rate
// dφ/dt, indexed from from.
func (a *analysis) driverSeries(f *frame, from, hi int) (phi, rate []float64, ok bool) {
	d := a.driver
	p0 := f.pointer(d.id, d.ks.Q[from])
	pl, ok := planeFor(d.id, p0)
	if !ok {
		return nil, nil, false
	}
	phi, rate = a.buffers(0, hi-from+1)
	prev := 0.0
	for i := from; i <= hi; i++ {
		p := f.pointer(d.id, d.ks.Q[i])
		ang := pl.angle(p)
		if i > from {
			ang = prev + wrapPi(ang-wrapPi(prev))
		}
		phi[i-from] = ang
		prev = ang
		rate[i-from] = pl.rate(p, f.omega(d.ks.Omega[i]))
	}
	return phi, rate, true
}

// detect finds the driver's events of the swing whose fastest moment is pk,
// with the frame and plane taken at sample from. It returns the swing (nil
// when not even the takeaway was found) and, when the swing fails a
// criterion, the reasons. Without full it stops after the address (the
// first pass, which only places the address).
func (a *analysis) detect(from, hi, pk int, full bool) (*swingResult, string) {
	d := a.driver
	f := a.frameAt(from)
	if !full {
		hi = pk
	}
	phi, rate, ok := a.driverSeries(&f, from, hi)
	if !ok {
		return nil, fmt.Sprintf("the %s points straight up or down at address", segName(d.id))
	}
	r := func(i int) float64 { return rate[i-from] }
	ph := func(i int) float64 { return phi[i-from] }
	if r(pk) <= 0 {
		return nil, fmt.Sprintf("its fastest movement (%.0f °/s at %.3f s) turns the %s away from the target; is the handedness right?",
			deg(d.mag[pk]), a.time(pk), segName(d.id))
	}
	// Top: the reversal at the backswing's extreme, the smallest angle
	// before the fastest moment (robust to wobbles of the rate), refined to
	// the rate's sign change next to it.
	j, top, found := reversal(phi, rate, from, pk, d.valid, a)
	if !found {
		return nil, fmt.Sprintf("no reversal from backswing to downswing before %.3f s", a.time(pk))
	}
	// Takeaway: back from the top through the backswing to where the
	// driver's speed falls to its onset level (or it stops moving back).
	i1 := -1
	for i := j; i >= from; i-- {
		if d.valid(i) && r(i) <= -d.still {
			i1 = i
			break
		}
	}
	if i1 < 0 {
		return nil, fmt.Sprintf("no backswing before the top at %.3f s", top)
	}
	i := i1
	for i > from && d.valid(i-1) && d.mag[i] > d.onset && r(i) < 0 {
		i--
	}
	if i == 0 && d.mag[0] > d.onset {
		return nil, fmt.Sprintf("the backswing before the top at %.3f s starts before the capture (no still address)", top)
	}
	take := a.time(i)
	if i+1 <= hi {
		take += a.dt * crossing(d.mag[i], d.mag[i+1], d.onset)
	}
	// Address: the last moment before the takeaway when every present
	// segment is still; when no such moment lies within AddressLookback
	// (a player who keeps some segment moving, e.g. a waggle of the head or
	// the trail arm), the moment before the takeaway at which the driver is
	// slowest.
	limit := max(from, i-int(math.Round(AddressLookback/a.dt)))
	ad := i - 1
	for ad > limit && !a.allStill(ad) {
		ad--
	}
	if ad < 0 || !a.allStill(ad) {
		ad = i
		best := math.Inf(1)
		for k := i - 1; k >= limit && k >= 0; k-- {
			if d.valid(k) && d.mag[k] < best {
				best, ad = d.mag[k], k
			}
		}
	}
	sw := &swingResult{f: f, addrIdx: ad, topIdx: j, peakIdx: pk, finishIdx: -1,
		address: a.time(ad), takeaway: take, top: top,
		transitions: map[kinchainv1.Segment]float64{}, transIdx: map[kinchainv1.Segment]int{}}
	if !full {
		return sw, ""
	}
	sw.amplitude = -ph(j)
	if j+1 <= hi {
		sw.amplitude = -(ph(j) + (ph(j+1)-ph(j))*(top-a.time(j))/a.dt)
	}

	var why []string
	if sw.amplitude < a.limits.Amplitude {
		why = append(why, fmt.Sprintf("backswing of the %s %.0f° in its swing plane, below %.0f° (half swing or waggle)",
			segName(d.id), deg(sw.amplitude), deg(a.limits.Amplitude)))
	}
	if d.mag[pk] < a.limits.PeakSpeed {
		why = append(why, fmt.Sprintf("peak speed of the %s %.0f °/s, below %.0f °/s",
			segName(d.id), deg(d.mag[pk]), deg(a.limits.PeakSpeed)))
	}
	// Impact: the driver's angle returns to its address value.
	m := -1
	for i := j + 1; i <= hi; i++ {
		if d.valid(i-1) && d.valid(i) && ph(i-1) < 0 && ph(i) >= 0 {
			m = i
			break
		}
	}
	if m < 0 {
		why = append(why, fmt.Sprintf("the %s did not return to its address angle after the top at %.3f s", segName(d.id), top))
	} else {
		sw.impactIdx = m - 1
		sw.impact = a.time(m-1) + a.dt*crossing(ph(m-1), ph(m), 0)
		a.refineImpact(sw)
	}
	sw.finishIdx = a.finishAfter(pk, max(pk, sw.impactIdx), hi)
	if sw.finishIdx >= 0 {
		sw.finish = a.time(sw.finishIdx)
	}
	return sw, strings.Join(why, "; ")
}

// reversal returns the reversal from backward to forward of an in-plane
// angle series phi (rate its rate; both indexed from base) over
// [base, end): the sample j of the smallest valid angle, which must lie
// inside the span with valid neighbours, and the time of the rate's sign change from ≤ 0 to > 0 in [j−1, j+1] by linear
// interpolation (t(j) when the rate does not change sign there).
func reversal(phi, rate []float64, base, end int, valid func(int) bool, a *analysis) (j int, t float64, ok bool) {
	j = -1
	for i := base; i < end; i++ {
		if valid(i) && (j < 0 || phi[i-base] < phi[j-base]) {
			j = i
		}
	}
	if j <= base || j >= end-1 || !valid(j-1) || !valid(j+1) {
		// At an end of the span, or next to a gap: the extreme is not a
		// reversal that the samples show.
		return j, 0, false
	}
	r := func(i int) float64 { return rate[i-base] }
	for _, i := range []int{j, j - 1} {
		if i >= base && i+1 < end && valid(i) && valid(i+1) && r(i) <= 0 && r(i+1) > 0 {
			return i, a.time(i) + a.dt*crossing(r(i), r(i+1), 0), true
		}
	}
	return j, a.time(j), true
}

// crossing returns the fraction u in [0, 1] at which the line from y0 to y1
// passes level: linear interpolation of a sampled crossing.
func crossing(y0, y1, level float64) float64 {
	if y1 == y0 {
		return 0
	}
	return math.Max(0, math.Min(1, (level-y0)/(y1-y0)))
}

// allStill reports whether every present segment is still (or invalid) at
// sample i.
func (a *analysis) allStill(i int) bool {
	for _, s := range a.segs {
		if s.valid(i) && s.mag[i] > s.still {
			return false
		}
	}
	return true
}

// finishAfter returns the finish sample at or after from: the first valid
// sample where the driver's speed falls to max(FinishStillFactor × still
// level, FinishFraction × its speed at pk), moved on while the speed keeps falling
// (at most FinishSettle); −1 when the speed does not fall that far within
// MergeGap after hi.
func (a *analysis) finishAfter(pk, from, hi int) int {
	d := a.driver
	level := math.Max(FinishStillFactor*d.still, FinishFraction*d.mag[pk])
	limit := min(a.n-1, hi+int(math.Round(MergeGap/a.dt)))
	settle := int(math.Round(FinishSettle / a.dt))
	for i := from; i <= limit; i++ {
		if !d.valid(i) || d.mag[i] > level {
			continue
		}
		j := i
		for j+1 < a.n && j-i < settle && d.valid(j+1) && d.mag[j+1] < d.mag[j] {
			j++
		}
		return j
	}
	return -1
}

// refineImpact moves impact to the ball strike when the club (else the
// driver) carries accelerometer readings with a shock near the angle-based
// impact: the sample interval, within ±ShockWindow, of the largest change of
// the specific force, when that change is at least ShockFactor × the median
// change over the downswing and at least ShockFloor m/s².
func (a *analysis) refineImpact(sw *swingResult) {
	s := a.bySeg[clubSeg]
	if s == nil || len(s.ks.Accel) != a.n {
		s = a.driver
	}
	acc := s.ks.Accel
	if len(acc) != a.n {
		return
	}
	w := max(1, int(math.Round(ShockWindow/a.dt)))
	c := sw.impactIdx
	change := func(i int) float64 {
		if i < 1 || i >= a.n || !s.valid(i) || !s.valid(i-1) {
			return math.NaN()
		}
		return norm(r3.Sub(acc[i], acc[i-1]))
	}
	var base []float64
	for i := sw.topIdx + 1; i < c-w; i++ {
		if v := change(i); !math.IsNaN(v) {
			base = append(base, v)
		}
	}
	if len(base) < 5 {
		return
	}
	med := median(base)
	best, bi := -1.0, -1
	for i := c - w; i <= c+w+1; i++ {
		if v := change(i); v > best {
			best, bi = v, i
		}
	}
	if bi < 1 || best < math.Max(ShockFactor*med, ShockFloor) {
		return
	}
	sw.impactIdx = bi - 1
	sw.impact = (a.time(bi-1) + a.time(bi)) / 2
}

// median returns the median of v (reordering v).
func median(v []float64) float64 {
	sort.Float64s(v)
	n := len(v)
	if n%2 == 1 {
		return v[n/2]
	}
	return (v[n/2-1] + v[n/2]) / 2
}

// complete finds the transitions and lead-arm events of an accepted swing
// and lists its events in time order.
func (a *analysis) complete(sw *swingResult) {
	f := &sw.f
	winEnd := a.downswingEnd(sw)
	for _, s := range a.segs {
		if s == a.driver {
			sw.transitions[s.id] = sw.top
			sw.transIdx[s.id] = sw.topIdx
			continue
		}
		if t, j, ok := a.transition(s, f, sw.addrIdx, sw.topIdx, winEnd); ok {
			sw.transitions[s.id] = t
			sw.transIdx[s.id] = j
		}
	}
	sw.events = []event{
		{kinchainv1.EventKind_EVENT_KIND_ADDRESS, sw.address},
		{kinchainv1.EventKind_EVENT_KIND_TAKEAWAY, sw.takeaway},
		{kinchainv1.EventKind_EVENT_KIND_TOP, sw.top},
		{kinchainv1.EventKind_EVENT_KIND_IMPACT, sw.impact},
	}
	if sw.finishIdx >= 0 {
		sw.events = append(sw.events, event{kinchainv1.EventKind_EVENT_KIND_FINISH, sw.finish})
	}
	if arm := a.bySeg[leadArm]; arm != nil {
		armTop := sw.topIdx
		if j, ok := sw.transIdx[leadArm]; ok {
			armTop = j
		}
		// The lead upper arm's long axis is horizontal: the vertical
		// component of its distal direction −z changes sign (the vertical
		// is the same in the world and the target-line frame).
		pz := func(i int) float64 { return rot.Rotate(arm.ks.Q[i], r3.Vec{Z: -1}).Z }
		ok := func(i int) bool { return arm.valid(i) && arm.valid(i+1) }
		for i := sw.addrIdx; i < armTop; i++ {
			if ok(i) && pz(i) < 0 && pz(i+1) >= 0 {
				sw.events = append(sw.events, event{kinchainv1.EventKind_EVENT_KIND_LEAD_ARM_LEVEL_BACKSWING,
					a.time(i) + a.dt*crossing(pz(i), pz(i+1), 0)})
				break
			}
		}
		for i := sw.impactIdx; i >= armTop; i-- {
			if ok(i) && pz(i) >= 0 && pz(i+1) < 0 {
				sw.events = append(sw.events, event{kinchainv1.EventKind_EVENT_KIND_LEAD_ARM_LEVEL_DOWNSWING,
					a.time(i) + a.dt*crossing(pz(i), pz(i+1), 0)})
				break
			}
		}
	}
	sort.SliceStable(sw.events, func(i, j int) bool { return sw.events[i].t < sw.events[j].t })
}

// transition returns segment s's own reversal: the reversal (see
// reversal) of its pointer's angle in its swing plane (see planeFor) before
// its fastest moment in [top, end]. The reversal counts only when the
// segment moved backward before it and forward after it faster than its
// still level.
func (a *analysis) transition(s *seg, f *frame, addr, top, end int) (t float64, j int, ok bool) {
	pl, ok := planeFor(s.id, f.pointer(s.id, s.ks.Q[addr]))
	if !ok {
		return 0, 0, false
	}
	pk := -1
	for i := top; i <= end; i++ {
		if s.valid(i) && (pk < 0 || s.mag[i] > s.mag[pk]) {
			pk = i
		}
	}
	if pk <= addr {
		return 0, 0, false
	}
	// The reversal is searched from TransitionLookback before the top (or
	// the address, if later); the plane stays the one at address. φ here is
	// the running trapezoidal integral of dφ/dt (its extreme is where the
	// rate changes sign, as for the angle itself, without an atan2 per
	// sample).
	addr = max(addr, top-int(math.Round(TransitionLookback/a.dt)))
	phi, rate := a.buffers(1, pk-addr+1)
	for i := addr; i <= pk; i++ {
		rate[i-addr] = pl.rate(f.pointer(s.id, s.ks.Q[i]), f.omega(s.ks.Omega[i]))
		if i == addr {
			phi[0] = 0
		} else {
			phi[i-addr] = phi[i-addr-1] + 0.5*a.dt*(rate[i-addr]+rate[i-addr-1])
		}
	}
	j, t, ok = reversal(phi, rate, addr, pk, s.valid, a)
	if !ok {
		return 0, 0, false
	}
	back, fwd := false, false
	for i := addr; i <= j; i++ {
		if s.valid(i) && rate[i-addr] <= -s.still {
			back = true
			break
		}
	}
	for i := j + 1; i <= pk; i++ {
		if s.valid(i) && rate[i-addr] >= s.still {
			fwd = true
			break
		}
	}
	if !back || !fwd {
		return 0, 0, false
	}
	return t, j, true
}
