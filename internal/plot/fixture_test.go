package plot

import (
	"math"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
)

// The hand-built swing used by the structure tests. Its numbers are an
// invented but plausible full swing: times in s relative to impact, peak
// speeds in deg/s, rising from pelvis to club (a proximal-to-distal chain,
// common practice, no source).
const (
	fixImpactS = 2.0
	fixRateHz  = 200
)

var fixEvents = []struct {
	kind kinchainv1.EventKind
	rel  float64 // s from impact
}{
	{kinchainv1.EventKind_EVENT_KIND_ADDRESS, -1.35},
	{kinchainv1.EventKind_EVENT_KIND_TAKEAWAY, -1.05},
	{kinchainv1.EventKind_EVENT_KIND_LEAD_ARM_LEVEL_BACKSWING, -0.72},
	{kinchainv1.EventKind_EVENT_KIND_TOP, -0.27},
	{kinchainv1.EventKind_EVENT_KIND_LEAD_ARM_LEVEL_DOWNSWING, -0.11},
	{kinchainv1.EventKind_EVENT_KIND_IMPACT, 0},
	{kinchainv1.EventKind_EVENT_KIND_FINISH, 1.10},
}

// fixSegments: downswing peak (deg/s, s from impact, width s) and backswing
// bump height (deg/s).
var fixSegments = []struct {
	seg       kinchainv1.Segment
	peak, at  float64
	width     float64
	backswing float64
	transMs   float64 // transition relative to top
}{
	{kinchainv1.Segment_SEGMENT_PELVIS, 480, -0.070, 0.090, 120, -38},
	{kinchainv1.Segment_SEGMENT_THORAX, 720, -0.045, 0.070, 180, -12},
	{kinchainv1.Segment_SEGMENT_LEAD_UPPER_ARM, 1050, -0.025, 0.055, 280, 9},
	{kinchainv1.Segment_SEGMENT_CLUB, 2300, -0.006, 0.040, 600, 24},
}

// fixExtra are the segments fixtureAll adds: the lead hand (a chain link)
// and six segments outside the chain.
var fixExtra = []struct {
	seg       kinchainv1.Segment
	peak, at  float64
	width     float64
	backswing float64
	transMs   float64
}{
	{kinchainv1.Segment_SEGMENT_LEAD_HAND, 1480, -0.015, 0.045, 380, 16},
	{kinchainv1.Segment_SEGMENT_HEAD, 150, -0.090, 0.120, 40, -20},
	{kinchainv1.Segment_SEGMENT_LEAD_FOREARM, 1250, -0.020, 0.050, 330, 12},
	{kinchainv1.Segment_SEGMENT_TRAIL_UPPER_ARM, 820, -0.035, 0.070, 210, 4},
	{kinchainv1.Segment_SEGMENT_TRAIL_FOREARM, 990, -0.030, 0.060, 260, 7},
	{kinchainv1.Segment_SEGMENT_TRAIL_HAND, 1390, -0.016, 0.046, 360, 15},
}

// fixSpeed is the fixture's speed of segment i at capture time t.
func fixSpeed(i int, t float64) float64 {
	s := fixSegments[i]
	r := t - fixImpactS
	down := s.peak * math.Exp(-math.Pow((r-s.at)/s.width, 2))
	back := s.backswing * math.Exp(-math.Pow((r+0.62)/0.22, 2))
	return down + back + 4
}

// fixture returns a complete response with series: one swing (or n copies
// of it, with later swings shifted) and, when extra is set, a head segment
// that is not part of the sequence.
func fixture() *kinchainv1.AnalyzeCaptureResponse {
	const n = 700 // 0 .. 3.495 s
	resp := &kinchainv1.AnalyzeCaptureResponse{
		CaptureId:    "range-session-07",
		SampleRateHz: fixRateHz,
		DurationS:    float64(n-1) / fixRateHz,
		Handedness:   kinchainv1.Handedness_HANDEDNESS_RIGHT,
		Speed:        kinchainv1.SpeedDefinition_SPEED_DEFINITION_MAGNITUDE,
	}
	sw := &kinchainv1.SwingReport{Index: 0, ProximalToDistal: true}
	for _, e := range fixEvents {
		sw.Events = append(sw.Events, &kinchainv1.Event{Kind: e.kind, TimeS: fixImpactS + e.rel})
	}
	for i, fs := range fixSegments {
		ser := &kinchainv1.Series{}
		best, bestT := 0.0, 0.0
		for k := 0; k < n; k++ {
			t := float64(k) / fixRateHz
			v := fixSpeed(i, t)
			ser.TimeS = append(ser.TimeS, t)
			ser.SpeedDegPerS = append(ser.SpeedDegPerS, v)
			ser.WxDegPerS = append(ser.WxDegPerS, 0)
			ser.WyDegPerS = append(ser.WyDegPerS, 0)
			ser.WzDegPerS = append(ser.WzDegPerS, v)
			if v > best {
				best, bestT = v, t
			}
		}
		resp.Segments = append(resp.Segments, &kinchainv1.SegmentKinematics{
			Segment: fs.seg, SampleRateHz: fixRateHz, PeakSpeedDegPerS: best, PeakTimeS: bestT, CutoffHz: 20, Series: ser,
		})
		atImpact := fixSpeed(i, fixImpactS)
		sw.Sequence = append(sw.Sequence, &kinchainv1.SegmentPeak{
			Segment: fs.seg, PeakSpeedDegPerS: best, PeakTimeS: bestT,
			TimeFromImpactMs:     (bestT - fixImpactS) * 1000,
			SpeedAtImpactDegPerS: atImpact,
			DecelerationPct:      (best - atImpact) / best * 100,
		})
		sw.PeakOrder = append(sw.PeakOrder, fs.seg)
		top := fixImpactS - 0.27
		sw.Transitions = append(sw.Transitions, &kinchainv1.Transition{
			Segment: fs.seg, TimeS: top + fs.transMs/1000, TimeFromTopMs: fs.transMs,
		})
	}
	for i := 1; i < len(sw.Sequence); i++ {
		a, b := sw.Sequence[i-1], sw.Sequence[i]
		sw.Gains = append(sw.Gains, &kinchainv1.Gain{
			Proximal: a.Segment, Distal: b.Segment,
			Ratio: b.PeakSpeedDegPerS / a.PeakSpeedDegPerS, GapDegPerS: b.PeakSpeedDegPerS - a.PeakSpeedDegPerS,
		})
	}
	sw.Tempo = &kinchainv1.Tempo{BackswingS: 0.78, DownswingS: 0.27, Ratio: 0.78 / 0.27}
	angles := func(r, f, l float64) *kinchainv1.BodyAngles {
		return &kinchainv1.BodyAngles{AxialRotationDeg: r, FlexionDeg: f, LateralBendDeg: l}
	}
	sw.Postures = []*kinchainv1.Posture{
		{Event: kinchainv1.EventKind_EVENT_KIND_ADDRESS, TimeS: fixImpactS - 1.35,
			Pelvis: angles(-2.1, 24.5, -1.2), Thorax: angles(-4.0, 38.2, 10.5), Separation: angles(-1.9, 13.4, 11.0)},
		{Event: kinchainv1.EventKind_EVENT_KIND_TOP, TimeS: fixImpactS - 0.27,
			Pelvis: angles(-46.3, 20.1, 6.4), Thorax: angles(-93.8, 31.0, 28.7), Separation: angles(-47.5, 10.2, 22.0)},
		{Event: kinchainv1.EventKind_EVENT_KIND_IMPACT, TimeS: fixImpactS,
			Pelvis: angles(38.7, 21.9, 9.8), Thorax: angles(24.1, 30.3, 33.6), Separation: angles(-14.6, 8.1, 24.8)},
	}
	resp.Swings = []*kinchainv1.SwingReport{sw}
	return resp
}

// fixtureAll is the fixture with all ten segments: the lead hand joins the
// chain (between lead upper arm and club) and six more segments have series
// and sequence rows.
func fixtureAll() *kinchainv1.AnalyzeCaptureResponse {
	resp := fixture()
	sw := resp.Swings[0]
	src := resp.Segments[0].Series
	for _, fe := range fixExtra {
		ser := &kinchainv1.Series{TimeS: src.TimeS}
		best, bestT := 0.0, 0.0
		for _, t := range src.TimeS {
			r := t - fixImpactS
			v := fe.peak*math.Exp(-math.Pow((r-fe.at)/fe.width, 2)) + fe.backswing*math.Exp(-math.Pow((r+0.62)/0.22, 2)) + 4
			ser.SpeedDegPerS = append(ser.SpeedDegPerS, v)
			if v > best {
				best, bestT = v, t
			}
		}
		resp.Segments = append(resp.Segments, &kinchainv1.SegmentKinematics{Segment: fe.seg, PeakSpeedDegPerS: best, PeakTimeS: bestT, Series: ser})
		sw.Sequence = append(sw.Sequence, &kinchainv1.SegmentPeak{Segment: fe.seg, PeakSpeedDegPerS: best, PeakTimeS: bestT,
			TimeFromImpactMs: (bestT - fixImpactS) * 1000})
		sw.Transitions = append(sw.Transitions, &kinchainv1.Transition{Segment: fe.seg, TimeS: fixImpactS - 0.27 + fe.transMs/1000, TimeFromTopMs: fe.transMs})
	}
	// Gains along pelvis → thorax → lead upper arm → lead hand → club.
	peak := map[kinchainv1.Segment]float64{}
	for _, sp := range sw.Sequence {
		peak[sp.Segment] = sp.PeakSpeedDegPerS
	}
	sw.Gains = nil
	for i := 1; i < len(chain); i++ {
		a, b := chain[i-1], chain[i]
		sw.Gains = append(sw.Gains, &kinchainv1.Gain{Proximal: a, Distal: b, Ratio: peak[b] / peak[a], GapDegPerS: peak[b] - peak[a]})
	}
	return resp
}
