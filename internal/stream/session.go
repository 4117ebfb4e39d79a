package stream

import (
	"context"
	"errors"
	"fmt"
	"math"

	"gonum.org/v1/gonum/num/quat"
	"gonum.org/v1/gonum/spatial/r3"
	"google.golang.org/protobuf/proto"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/capture"
	"github.com/kinchain/kinchain/internal/condition"
	"github.com/kinchain/kinchain/internal/engine"
	"github.com/kinchain/kinchain/internal/kinematics"
	"github.com/kinchain/kinchain/internal/rot"
	"github.com/kinchain/kinchain/internal/swing"
	"github.com/kinchain/kinchain/internal/validate"
)

// Bounds on what a session accumulates besides its rings.
const (
	// maxWarnings bounds the warnings a summary carries.
	maxWarnings = 100
	// maxPending bounds the swings waiting for their analysis (for lagging
	// segments); beyond it the oldest is analysed with what has arrived.
	maxPending = 4
	// MaxLag is how far, s, the driver may run ahead of another segment
	// before a finished swing is analysed without waiting for it.
	MaxLag = 1.0
)

// segState is one declared segment of a stream.
type segState struct {
	seg   kinchainv1.Segment
	name  string       // segmentName(seg), for messages
	mount *quat.Number // from the header, or from the neutral window
	ring  *ring        // nil until the segment's first samples
	stats trackStats
	n     int64
	first float64
	last  float64

	prevQ   quat.Number
	hasPrev bool

	accelMags    [accelCheckSamples]float64
	accelN       int
	accelChecked bool

	neutral []quat.Number // normalised quaternions inside options.neutral

	// Lead upper arm: the previous vertical component of its distal axis.
	// armAxis is the segment's swing.PointerAxis in the sensor frame (the
	// driver's detector follows the same axis).
	armAxis  r3.Vec
	armPrevZ float64
	armPrevT float64
	armHave  bool
}

// firstTime returns the segment's first sample time, or t0 when it has
// none yet.
func (st *segState) firstTime(t0 float64) float64 {
	if st.n > 0 {
		return st.first
	}
	return t0
}

// pending is a finished swing waiting for its analysis.
type pending struct {
	index          int // the swing index its events carried
	t0, t1, impact float64
}

// Session is the state of one StreamCapture call: the header, a bounded
// ring buffer per segment, the causal detector and the swings waiting for
// their analysis. A Session is not safe for concurrent use; the server
// drives each from one goroutine.
type Session struct {
	lim     Limits
	vlim    validate.Limits
	hdr     *kinchainv1.StreamHeader
	opts    *kinchainv1.AnalysisOptions // for the window analyses (neutral cleared when calibrated here)
	rate    float64
	eng     *engine.Engine
	segs    []*segState
	bySeg   [16]int
	driver  int // index into segs, −1 when none can drive detection
	arm     int // index of the lead upper arm, −1
	det     *detector
	hdrMnt  bool
	neutral *neutralWindow
	calDone bool

	bufferBytes int
	samples     int64
	first, last float64
	haveTime    bool

	reports int // swing reports sent
	pend    []pending

	warnings []*kinchainv1.Warning
	dropped  int
	warnSeen map[warnKey]bool

	idx    []int
	closed bool

	// skipAnalysis, set by benchmarks, drops finished swings instead of
	// analysing them, to time the per-frame work alone; lastPending keeps
	// the last swing analysed, for timing its analysis alone.
	skipAnalysis bool
	lastPending  pending
}

// neutralWindow is the neutral-pose window, s.
type neutralWindow struct{ start, end float64 }

type warnKey struct {
	code kinchainv1.WarningCode
	seg  kinchainv1.Segment
}

// NewSession checks a stream's header against lim (zero fields: defaults)
// and returns its session. A bad header gives a *validate.Error naming the
// field under "header." (header.rate_hz, header.segments[2], …).
func NewSession(h *kinchainv1.StreamHeader, lim Limits) (*Session, error) {
	lim = lim.WithDefaults()
	mounts, err := checkHeader(h, lim)
	if err != nil {
		return nil, err
	}
	s := &Session{
		lim:      lim,
		vlim:     validate.Limits{MinRate: lim.MinRateHz, MaxRate: lim.MaxRateHz},
		hdr:      proto.Clone(h).(*kinchainv1.StreamHeader),
		rate:     h.GetRateHz(),
		eng:      engine.New(engine.Config{}),
		driver:   -1,
		arm:      -1,
		hdrMnt:   mounts != nil,
		warnSeen: map[warnKey]bool{},
	}
	for i := range s.bySeg {
		s.bySeg[i] = -1
	}
	s.opts = proto.Clone(h.GetOptions()).(*kinchainv1.AnalysisOptions)
	if s.opts == nil {
		s.opts = &kinchainv1.AnalysisOptions{}
	}
	if w := s.opts.GetNeutral(); w != nil && !s.hdrMnt {
		s.neutral = &neutralWindow{w.GetStartS(), w.GetEndS()}
	}
	// The window analyses get explicit mountings instead (see calibrate).
	s.opts.Neutral = nil
	for i, seg := range h.GetSegments() {
		st := &segState{seg: seg, name: segmentName(seg), armAxis: swing.PointerAxis(seg)}
		if mounts != nil {
			st.mount = mounts[i]
			st.armAxis = rot.Rotate(rot.Conj(*mounts[i]), swing.PointerAxis(seg))
		}
		st.stats.init(s.rate)
		s.segs = append(s.segs, st)
		s.bySeg[seg] = i
		if seg == kinchainv1.Segment_SEGMENT_LEAD_UPPER_ARM {
			s.arm = i
		}
	}
	for _, d := range swing.Drivers() {
		if k := s.bySeg[d]; k >= 0 {
			s.driver = k
			break
		}
	}
	return s, nil
}

// cutoff returns the live detector's low-pass cutoff, Hz:
// LiveCutoffFraction of the analysis cutoff (kinematics.DefaultCutoff
// unless the options set one; the default also under residual analysis),
// kept below 0.45 × rate; 0 (no filter) when the options turn filtering
// off.
func (s *Session) cutoff() float64 {
	c := kinematics.DefaultCutoff
	if s.opts.CutoffHz != nil && !s.opts.GetResidualCutoff() {
		c = s.opts.GetCutoffHz()
	}
	return math.Min(LiveCutoffFraction*c, 0.45*s.rate)
}

// Push checks a batch and takes in its samples. It returns the events the
// batch decided and the reports of the swings it completed, in order. A
// bad batch gives a *validate.Error naming the field under "batch."
// (batch.tracks[1].time_s[3]); the session then holds nothing of it.
func (s *Session) Push(b *kinchainv1.SampleBatch) ([]*kinchainv1.StreamCaptureResponse, error) {
	if s.closed {
		return nil, &validate.Error{Field: "batch", Sample: -1, Reason: validate.ReasonBadValue, Detail: "the stream is closed"}
	}
	idx, err := s.checkBatch(b, s.idx)
	s.idx = idx
	if err != nil {
		return nil, err
	}
	tracks := b.GetTracks()
	var out []*kinchainv1.StreamCaptureResponse
	// Every other segment first, so that the driver's decisions find the
	// other segments' samples of the same batch in their rings.
	for i, k := range idx {
		if k >= 0 && k != s.driver {
			out = s.take(k, tracks[i], out)
		}
	}
	for i, k := range idx {
		if k >= 0 && k == s.driver {
			out = s.take(k, tracks[i], out)
		}
	}
	out = s.flush(false, out)
	return out, nil
}

// take appends the samples of track t to segment k and runs the detector.
func (s *Session) take(k int, t *kinchainv1.Track, out []*kinchainv1.StreamCaptureResponse) []*kinchainv1.StreamCaptureResponse {
	st := s.segs[k]
	a := capture.TrackArrays(t)
	n := len(a[capture.ArrayTime])
	if st.ring == nil {
		var set columnSet = 1 << capture.ArrayTime
		for j := 1; j < capture.NumArrays; j++ {
			if len(a[j]) > 0 {
				set |= 1 << j
			}
		}
		st.ring = newRing(set, s.lim.ringCapacity(s.rate))
		s.bufferBytes += st.ring.limit * 8 * st.ring.set.count()
		if k == s.driver {
			s.newDetector(st)
		}
	}
	hasQ, hasA := st.ring.set.has(capture.ArrayQw), st.ring.set.has(capture.ArrayAx)
	isDriver, isArm := k == s.driver && s.det != nil, k == s.arm
	for j := 0; j < n; j++ {
		tj := a[capture.ArrayTime][j]
		st.ring.push(&a, j)
		if st.n == 0 {
			st.first = tj
		} else {
			st.stats.interval(tj-st.last, tj)
		}
		st.n++
		st.last = tj
		var q quat.Number
		if hasQ {
			q = quat.Number{Real: a[capture.ArrayQw][j], Imag: a[capture.ArrayQx][j], Jmag: a[capture.ArrayQy][j], Kmag: a[capture.ArrayQz][j]}
			norm := math.Sqrt(q.Real*q.Real + q.Imag*q.Imag + q.Jmag*q.Jmag + q.Kmag*q.Kmag)
			if renormCounted(norm) {
				st.stats.renorm++
			}
			sc := 1 / norm
			q = quat.Number{Real: q.Real * sc, Imag: q.Imag * sc, Jmag: q.Jmag * sc, Kmag: q.Kmag * sc}
			if st.hasPrev && rot.Dot(st.prevQ, q) < 0 {
				st.stats.flips++
			}
			st.prevQ, st.hasPrev = q, true
			if s.neutral != nil && !s.calDone && tj >= s.neutral.start && tj <= s.neutral.end &&
				len(st.neutral) < s.neutralCap() {
				st.neutral = append(st.neutral, q)
			}
		}
		if hasA && !st.accelChecked {
			x, y, z := a[capture.ArrayAx][j], a[capture.ArrayAy][j], a[capture.ArrayAz][j]
			st.accelMags[st.accelN] = math.Sqrt(x*x + y*y + z*z)
			st.accelN++
			if st.accelN == accelCheckSamples {
				st.accelChecked = true
			}
		}
		if isArm && hasQ {
			s.armStep(st, tj, q)
		}
		if isDriver {
			if s.det.gyroOnly {
				s.det.stepGyro(tj, r3.Vec{X: a[capture.ArrayGx][j], Y: a[capture.ArrayGy][j], Z: a[capture.ArrayGz][j]})
			} else {
				s.det.step(tj, q)
			}
		}
		if s.det != nil && len(s.det.out) > 0 {
			out = s.decide(out)
		}
	}
	s.samples += int64(n)
	if n > 0 {
		if !s.haveTime || a[capture.ArrayTime][0] < s.first {
			s.first = a[capture.ArrayTime][0]
		}
		if !s.haveTime || st.last > s.last {
			s.last = st.last
		}
		s.haveTime = true
	}
	if s.neutral != nil && !s.calDone && s.neutralPassed() {
		s.calibrate()
	}
	return out
}

// neutralCap bounds the quaternions kept per segment for the neutral
// window.
func (s *Session) neutralCap() int {
	return int(math.Ceil((s.neutral.end-s.neutral.start)*s.rate*rateSlack)) + 1
}

// newDetector starts the detector on the driver's first samples.
func (s *Session) newDetector(st *segState) {
	axis := swing.PointerAxis(st.seg)
	if st.mount != nil {
		axis = rot.Rotate(rot.Conj(*st.mount), axis)
	}
	gyroOnly := !st.ring.set.has(capture.ArrayQw)
	d, err := newDetector(st.seg, s.rate, s.cutoff(), axis, gyroOnly, st.stats.bound)
	if err != nil {
		// The cutoff is below 0.45 × rate and positive; a design failure
		// means no filtering can be had.
		d, _ = newDetector(st.seg, s.rate, 0, axis, gyroOnly, st.stats.bound)
	}
	s.det = d
}

// armStep follows the lead upper arm's distal axis −z: its vertical
// component changes sign when the arm passes horizontal.
func (s *Session) armStep(st *segState, t float64, q quat.Number) {
	z := rot.Rotate(q, st.armAxis).Z
	if st.armHave && s.det != nil {
		switch {
		case st.armPrevZ < 0 && z >= 0:
			s.det.addArm(armCrossing{t: st.armPrevT + (t-st.armPrevT)*crossingAt(st.armPrevZ, z, 0), at: t, up: true})
		case st.armPrevZ >= 0 && z < 0:
			s.det.addArm(armCrossing{t: st.armPrevT + (t-st.armPrevT)*crossingAt(st.armPrevZ, z, 0), at: t})
		}
	}
	st.armPrevZ, st.armPrevT, st.armHave = z, t, true
}

// decide turns the detector's decisions into responses.
func (s *Session) decide(out []*kinchainv1.StreamCaptureResponse) []*kinchainv1.StreamCaptureResponse {
	for _, d := range s.det.out {
		switch d.kind {
		case decEvent:
			out = append(out, &kinchainv1.StreamCaptureResponse{Message: &kinchainv1.StreamCaptureResponse_Event{
				Event: &kinchainv1.StreamEvent{
					SwingIndex:  int32(s.reports + len(s.pend)),
					Event:       &kinchainv1.Event{Kind: d.event, TimeS: d.t},
					DetectedAtS: d.at,
				}}})
		case decComplete:
			s.pend = append(s.pend, pending{index: s.reports + len(s.pend), t0: d.t0, t1: d.t1, impact: d.impact})
		}
	}
	s.det.out = s.det.out[:0]
	return out
}

// ready reports whether every segment with samples has reached the end of
// p's window, or the driver is MaxLag past it.
func (s *Session) ready(p *pending) bool {
	if s.driver >= 0 && s.segs[s.driver].last >= p.t1+MaxLag {
		return true
	}
	for _, st := range s.segs {
		if st.n > 0 && st.last < p.t1 {
			return false
		}
	}
	return true
}

// flush analyses the pending swings that are ready (all of them when all
// is set) and appends their reports.
func (s *Session) flush(all bool, out []*kinchainv1.StreamCaptureResponse) []*kinchainv1.StreamCaptureResponse {
	for len(s.pend) > 0 {
		p := &s.pend[0]
		if !all && len(s.pend) <= maxPending && !s.ready(p) {
			break
		}
		if s.skipAnalysis {
			s.pend = s.pend[1:]
			continue
		}
		s.lastPending = *p
		if r := s.analyse(p); r != nil {
			out = append(out, &kinchainv1.StreamCaptureResponse{Message: &kinchainv1.StreamCaptureResponse_Swing{Swing: r}})
			s.reports++
		}
		s.pend = s.pend[1:]
		if len(s.pend) == 0 {
			s.pend = nil
		}
	}
	return out
}

// Close ends the stream: a swing whose impact was reported is analysed
// with the samples received, pending analyses are run, and the summary
// comes last. Close after Close returns the summary again.
func (s *Session) Close() []*kinchainv1.StreamCaptureResponse {
	var out []*kinchainv1.StreamCaptureResponse
	if !s.closed {
		s.closed = true
		if s.neutral != nil && !s.calDone {
			s.calibrate()
		}
		if s.det != nil {
			s.det.finishAtClose()
			out = s.decide(out)
		}
		out = s.flush(true, out)
	}
	return append(out, &kinchainv1.StreamCaptureResponse{Message: &kinchainv1.StreamCaptureResponse_Summary{Summary: s.summary()}})
}

// summary builds the closing summary.
func (s *Session) summary() *kinchainv1.StreamSummary {
	sum := &kinchainv1.StreamSummary{Samples: s.samples, Swings: int32(s.reports), Quality: &kinchainv1.Quality{}}
	if s.haveTime {
		sum.DurationS = s.last - s.first
	}
	top := 0.0
	for _, st := range s.segs {
		top = math.Max(top, st.stats.rate())
	}
	var ws []*kinchainv1.Warning
	for _, st := range s.segs {
		if st.n == 0 {
			continue
		}
		sum.Quality.Tracks = append(sum.Quality.Tracks, st.stats.quality(st.seg, st.n, !st.ring.set.has(capture.ArrayQw)))
		ws = append(ws, st.stats.warnings(st.seg, st.n, top)...)
	}
	if s.driver < 0 {
		ws = append(ws, &kinchainv1.Warning{Code: kinchainv1.WarningCode_WARNING_CODE_SEGMENTS_MISSING,
			Message: "no swing detection: the stream declares none of club, lead_hand, lead_forearm, lead_upper_arm"})
	}
	ws = append(ws, s.warnings...)
	if s.dropped > 0 {
		ws = append(ws, &kinchainv1.Warning{Code: kinchainv1.WarningCode_WARNING_CODE_UNSPECIFIED,
			Message: fmt.Sprintf("%d further warnings were left out (the summary keeps %d)", s.dropped, maxWarnings)})
	}
	sum.Quality.Warnings = ws
	return sum
}

// warn records a warning for the summary, keeping at most maxWarnings.
func (s *Session) warn(w *kinchainv1.Warning) {
	if len(s.warnings) >= maxWarnings {
		s.dropped++
		return
	}
	s.warnings = append(s.warnings, w)
}

// neutralPassed reports whether every segment with samples is past the
// neutral window.
func (s *Session) neutralPassed() bool {
	any := false
	for _, st := range s.segs {
		if st.n == 0 {
			continue
		}
		any = true
		if st.last <= s.neutral.end {
			return false
		}
	}
	return any
}

// calibrate computes each segment's mounting from its quaternions in the
// neutral window exactly as condition.Run does for a capture with that
// window (condition.MeanOrientation, condition.NeutralMounting, the
// heading of the pelvis, else the thorax, else the first declared
// segment), so that the window analyses, given these as explicit
// mountings, see the segment frames the unary analysis sees.
func (s *Session) calibrate() {
	s.calDone = true
	defer func() {
		for _, st := range s.segs {
			st.neutral = nil
		}
	}()
	ref := -1
	for _, seg := range []kinchainv1.Segment{kinchainv1.Segment_SEGMENT_PELVIS, kinchainv1.Segment_SEGMENT_THORAX} {
		if k := s.bySeg[seg]; k >= 0 && len(s.segs[k].neutral) > 0 {
			ref = k
			break
		}
	}
	if ref < 0 && len(s.segs[0].neutral) > 0 {
		ref = 0
	}
	if ref < 0 {
		s.warn(&kinchainv1.Warning{Code: kinchainv1.WarningCode_WARNING_CODE_NEUTRAL_NOT_STILL,
			Message: fmt.Sprintf("the neutral-pose window %g..%g s holds no samples of the reference segment; sensors are taken as aligned with their segments",
				s.neutral.start, s.neutral.end)})
		return
	}
	means := make([]quat.Number, len(s.segs))
	ok := make([]bool, len(s.segs))
	for k, st := range s.segs {
		if len(st.neutral) == 0 {
			continue
		}
		m, good := condition.MeanOrientation(st.neutral)
		if !good {
			continue
		}
		means[k], ok[k] = m, true
		worst := 0.0
		for _, q := range st.neutral {
			worst = math.Max(worst, rot.Angle(m, q))
		}
		if worst > condition.NeutralStillLimit {
			s.warn(&kinchainv1.Warning{Code: kinchainv1.WarningCode_WARNING_CODE_NEUTRAL_NOT_STILL, Segment: st.seg,
				Message: fmt.Sprintf("%s moved %.1f° from its mean orientation during the neutral-pose window (limit %.0f°); its calibration may be off",
					segmentName(st.seg), worst*180/math.Pi, condition.NeutralStillLimit*180/math.Pi)})
		}
	}
	if !ok[ref] {
		return
	}
	heading := rot.Heading(means[ref])
	for k, st := range s.segs {
		if !ok[k] {
			s.warn(&kinchainv1.Warning{Code: kinchainv1.WarningCode_WARNING_CODE_NEUTRAL_NOT_STILL, Segment: st.seg,
				Message: fmt.Sprintf("%s has no samples in the neutral-pose window; its sensor is taken as aligned with the segment", segmentName(st.seg))})
			continue
		}
		m := condition.NeutralMounting(means[k], heading)
		st.mount = &m
		st.armAxis = rot.Rotate(rot.Conj(m), swing.PointerAxis(st.seg))
		if k == s.driver && s.det != nil {
			s.det.setAxis(st.armAxis)
		}
	}
}

// analyse runs the batch analysis on p's window and returns the report of
// the swing found there, or nil (with a warning saying why).
func (s *Session) analyse(p *pending) *kinchainv1.SwingReport {
	pc := &kinchainv1.Capture{
		CaptureId:  s.hdr.GetCaptureId(),
		Handedness: s.hdr.GetHandedness(),
		Club:       s.hdr.GetClub(),
	}
	if s.hdr.TargetHeadingDeg != nil {
		h := s.hdr.GetTargetHeadingDeg()
		pc.TargetHeadingDeg = &h
	}
	minSamples := s.vlim.WithDefaults().MinSamples
	for _, st := range s.segs {
		if st.ring == nil {
			continue
		}
		if f, ok := st.ring.first(); ok && f > p.t0 && st.ring.total > int64(st.ring.n) {
			s.warn(&kinchainv1.Warning{Code: kinchainv1.WarningCode_WARNING_CODE_SWING_REJECTED, Segment: st.seg, TimeS: &p.impact,
				Message: fmt.Sprintf("swing %d: %s's buffer starts at %.3f s, after the analysis window's start %.3f s; the window is shortened (raise the buffer limit)",
					p.index, segmentName(st.seg), f, p.t0)})
		}
		arr := st.ring.copyWindow(p.t0, p.t1)
		if len(arr[capture.ArrayTime]) < minSamples {
			continue
		}
		tr := &kinchainv1.Track{Segment: st.seg}
		capture.SetTrackArrays(tr, &arr)
		if st.mount != nil {
			m := st.mount
			tr.Mounting = &kinchainv1.Quaternion{W: m.Real, X: m.Imag, Y: m.Jmag, Z: m.Kmag}
		}
		pc.Tracks = append(pc.Tracks, tr)
	}
	reject := func(format string, a ...any) *kinchainv1.SwingReport {
		t := p.impact
		s.warn(&kinchainv1.Warning{Code: kinchainv1.WarningCode_WARNING_CODE_SWING_REJECTED, TimeS: &t,
			Message: fmt.Sprintf("live swing %d (impact at %.3f s) has no report: ", p.index, p.impact) + fmt.Sprintf(format, a...)})
		return nil
	}
	if len(pc.Tracks) == 0 {
		return reject("no samples in its window %.3f..%.3f s", p.t0, p.t1)
	}
	c, err := validate.Capture(pc, s.vlim, nil)
	if err != nil {
		return reject("its window %.3f..%.3f s does not validate: %v", p.t0, p.t1, err)
	}
	resp, err := s.eng.AnalyzeValidated(context.Background(), c, s.opts)
	if err != nil {
		var ve *validate.Error
		if errors.As(err, &ve) {
			return reject("its window %.3f..%.3f s: %v", p.t0, p.t1, err)
		}
		return reject("analysis failed: %v", err)
	}
	for _, tq := range resp.GetQuality().GetTracks() {
		if k := s.bySeg[tq.GetSegment()]; k >= 0 {
			st := s.segs[k]
			st.stats.gyroSat = st.stats.gyroSat || tq.GetGyroSaturationSuspected()
			st.stats.accelClip = st.stats.accelClip || tq.GetAccelClippingSuspected()
		}
	}
	best, bestD := -1, math.Inf(1)
	for i, sw := range resp.GetSwings() {
		for _, e := range sw.GetEvents() {
			if e.GetKind() == kinchainv1.EventKind_EVENT_KIND_IMPACT {
				if d := math.Abs(e.GetTimeS() - p.impact); d < bestD {
					best, bestD = i, d
				}
			}
		}
	}
	var rejected []string
	for _, w := range resp.GetQuality().GetWarnings() {
		switch w.GetCode() {
		case kinchainv1.WarningCode_WARNING_CODE_SWING_REJECTED:
			rejected = append(rejected, w.GetMessage())
		case kinchainv1.WarningCode_WARNING_CODE_GAP_NOT_BRIDGED, kinchainv1.WarningCode_WARNING_CODE_TIMING_JITTER,
			kinchainv1.WarningCode_WARNING_CODE_RENORMALIZED, kinchainv1.WarningCode_WARNING_CODE_LOW_RATE:
			// The summary computes these over the whole stream.
		default:
			key := warnKey{w.GetCode(), w.GetSegment()}
			if !s.warnSeen[key] {
				s.warnSeen[key] = true
				s.warn(w)
			}
		}
	}
	if best < 0 || bestD > MaxDownswing {
		why := "the batch analysis found no swing in it"
		if len(rejected) > 0 {
			why = fmt.Sprintf("%s (%s)", why, rejected[0])
		}
		return reject("window %.3f..%.3f s: %s", p.t0, p.t1, why)
	}
	r := resp.GetSwings()[best]
	// The index counts the swings reported before it, as the unary
	// analysis counts the swings of a capture.
	r.Index = int32(s.reports)
	return r
}
