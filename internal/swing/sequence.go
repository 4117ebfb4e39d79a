package swing

import (
	"fmt"
	"math"
	"sort"
	"strings"

	"gonum.org/v1/gonum/num/quat"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
)

// sequenceResult is the kinematic sequence of one swing.
type sequenceResult struct {
	rows             []*kinchainv1.SegmentPeak
	order            []kinchainv1.Segment
	proximalToDistal bool
	gains            []*kinchainv1.Gain
}

// sequence finds each present segment's peak speed in its downswing window,
// from the earlier of the top and its own transition to
// DownswingAfterImpact after impact (downswingEnd), and derives the order,
// the proximal-to-distal check and the gains.
func (a *analysis) sequence(sw *swingResult) sequenceResult {
	var res sequenceResult
	end := a.downswingEnd(sw)
	peaks := map[kinchainv1.Segment]*kinchainv1.SegmentPeak{}
	for _, s := range a.segs {
		start := sw.topIdx
		if j, ok := sw.transIdx[s.id]; ok && j < start {
			start = j
		}
		v, t, ok := a.peak(s, start, end)
		if !ok {
			continue
		}
		atImpact := a.speedAt(s, sw.impact)
		row := &kinchainv1.SegmentPeak{
			Segment:              s.id,
			PeakSpeedDegPerS:     deg(v),
			PeakTimeS:            t,
			TimeFromImpactMs:     (t - sw.impact) * 1000,
			SpeedAtImpactDegPerS: deg(atImpact),
			DecelerationPct:      decelerationPct(v, atImpact),
		}
		res.rows = append(res.rows, row)
		peaks[s.id] = row
	}
	for _, r := range res.rows {
		res.order = append(res.order, r.Segment)
	}
	sort.SliceStable(res.order, func(i, j int) bool {
		return peaks[res.order[i]].PeakTimeS < peaks[res.order[j]].PeakTimeS
	})
	var links []*kinchainv1.SegmentPeak
	for _, s := range chain {
		if p := peaks[s]; p != nil {
			links = append(links, p)
		}
	}
	res.proximalToDistal = proximalToDistal(links)
	for i := 1; i < len(links); i++ {
		res.gains = append(res.gains, gain(links[i-1], links[i]))
	}
	return res
}

// downswingEnd returns the last sample of the swing's downswing window,
// counted in whole samples from the impact sample interval
// [impactIdx, impactIdx+1] (impact lies inside it):
//
//	end = impactIdx + 1 + round(DownswingAfterImpact × rate),
//
// clamped to the grid: DownswingAfterImpact after the first sample at or
// after impact, so the window reaches at least DownswingAfterImpact past
// impact and less than one sample more. Counting from the index, not
// rounding the time impact + DownswingAfterImpact to the nearest sample,
// keeps the window independent of where the grid starts: an impact moved
// to the ball-strike shock is the middle of a sample interval, and an exact
// half rounds either way with the grid origin's rounding error, which made
// an analysis of part of a capture (the live stream's window) end the
// window one sample off the analysis of the whole capture. The transition
// search (complete) ends at the same sample.
func (a *analysis) downswingEnd(sw *swingResult) int {
	return min(a.n-1, sw.impactIdx+1+int(math.Round(DownswingAfterImpact/a.dt)))
}

// peak returns the largest speed of s over the valid samples in
// [start, end] and its time, refined by the vertex of the parabola through
// the largest sample and its neighbours when both are valid and inside the
// window (three-point parabolic interpolation, common practice, no source).
func (a *analysis) peak(s *seg, start, end int) (v, t float64, ok bool) {
	best := -1
	for i := start; i <= end; i++ {
		if s.valid(i) && (best < 0 || s.ks.Speed[i] > s.ks.Speed[best]) {
			best = i
		}
	}
	if best < 0 {
		return 0, 0, false
	}
	v, t = s.ks.Speed[best], a.time(best)
	if best > start && best < end && s.valid(best-1) && s.valid(best+1) {
		dv, dt := parabolicPeak(s.ks.Speed[best-1], v, s.ks.Speed[best+1])
		v, t = dv, t+dt*a.dt
	}
	return v, t, true
}

// parabolicPeak returns the vertex of the parabola through (−1, y0),
// (0, y1), (1, y2) with y1 the largest: offset u = (y0 − y2)/(2(y0 − 2y1 +
// y2)) in samples, value y1 − (y0 − y2)·u/4. It returns (y1, 0) when the
// three points are collinear.
func parabolicPeak(y0, y1, y2 float64) (v, u float64) {
	den := y0 - 2*y1 + y2
	if den >= 0 {
		return y1, 0
	}
	u = 0.5 * (y0 - y2) / den
	return y1 - 0.25*(y0-y2)*u, u
}

// decelerationPct returns (peak − at impact)/peak × 100, 0 for a zero peak.
func decelerationPct(peak, atImpact float64) float64 {
	if peak <= 0 {
		return 0
	}
	return (peak - atImpact) / peak * 100
}

// proximalToDistal reports whether the chain links (pelvis, thorax, lead
// upper arm, lead hand, club, those present, in that order) peak in that
// order (equal times allowed) and each faster than the one before.
func proximalToDistal(links []*kinchainv1.SegmentPeak) bool {
	if len(links) < 2 {
		return false
	}
	for i := 1; i < len(links); i++ {
		if links[i].PeakTimeS < links[i-1].PeakTimeS || links[i].PeakSpeedDegPerS <= links[i-1].PeakSpeedDegPerS {
			return false
		}
	}
	return true
}

// gain compares two adjacent links: ratio distal/proximal peak speed and
// their difference, °/s.
func gain(p, d *kinchainv1.SegmentPeak) *kinchainv1.Gain {
	g := &kinchainv1.Gain{Proximal: p.Segment, Distal: d.Segment, GapDegPerS: d.PeakSpeedDegPerS - p.PeakSpeedDegPerS}
	if p.PeakSpeedDegPerS > 0 {
		g.Ratio = d.PeakSpeedDegPerS / p.PeakSpeedDegPerS
	}
	return g
}

// postures returns the posture at each event of sw (PostureAt on the
// segments' orientations in the swing's mirrored target-line frame,
// interpolated to the event time), and adds a GIMBAL_LOCK warning for each
// event at which the lead arm angles are near gimbal lock.
func (a *analysis) postures(sw *swingResult) []*kinchainv1.Posture {
	var out []*kinchainv1.Posture
	for _, e := range sw.events {
		get := func(id kinchainv1.Segment) (q quat.Number, ok bool) {
			s := a.bySeg[id]
			if s == nil {
				return q, false
			}
			q, ok = a.at(s, e.t)
			return sw.f.orientation(q), ok
		}
		p := PostureAt(get)
		if p == nil {
			continue
		}
		p.Event, p.TimeS = e.kind, e.t
		out = append(out, p)
		if p.LeadArm != nil && p.LeadArm.NearGimbalLock {
			t := e.t
			a.warnings = append(a.warnings, &kinchainv1.Warning{
				Code: kinchainv1.WarningCode_WARNING_CODE_GIMBAL_LOCK, Segment: leadArm, TimeS: &t,
				Message: fmt.Sprintf("lead arm angles at %s (%.3f s): elevation %.1f° is near gimbal lock",
					eventName(e.kind), t, p.LeadArm.ElevationDeg),
			})
		}
	}
	return out
}

// eventName returns the short name of an event kind ("top").
func eventName(k kinchainv1.EventKind) string {
	return strings.ToLower(strings.TrimPrefix(k.String(), "EVENT_KIND_"))
}
