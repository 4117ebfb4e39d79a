package condition

import (
	"fmt"
	"math"
	"sort"
	"strconv"
	"strings"

	"gonum.org/v1/gonum/num/quat"
	"gonum.org/v1/gonum/spatial/r3"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/capture"
	"github.com/kinchain/kinchain/internal/rot"
)

// Limits of Run.
const (
	// MaxRate is the highest grid rate accepted, Hz.
	MaxRate = 10000
	// MaxGridSamples is the largest grid accepted, samples per segment.
	MaxGridSamples = 1 << 24
	// maxGapWarnings is the number of gaps reported one by one per track;
	// the last of these warnings also counts the rest.
	maxGapWarnings = 8
)

// Options tune Run. The zero value gives the documented defaults.
type Options struct {
	// Rate is the rate of the common grid, Hz; 0: the highest effective
	// rate among the tracks (1 / median sample interval), rounded to a whole
	// number of Hz when within 1e-6 of it.
	Rate float64
	// MaxGap is the longest sample interval, s, that resampling bridges by
	// interpolation; 0: each track's GapBound, max(3 × its median interval,
	// 10 ms).
	MaxGap float64
	// Neutral, when non-nil, overrides the capture's neutral-pose window.
	Neutral *capture.Window
}

// InputError reports input that Run cannot condition. Field names the
// capture field in the API's terms ("tracks[2].time_s"); Sample is the
// sample index, or −1 when no single sample is at fault.
type InputError struct {
	Field  string
	Sample int
	Detail string
}

// Error returns "field[sample]: detail", or "field: detail" without a sample.
func (e *InputError) Error() string {
	if e.Sample >= 0 {
		return fmt.Sprintf("%s[%d]: %s", e.Field, e.Sample, e.Detail)
	}
	return fmt.Sprintf("%s: %s", e.Field, e.Detail)
}

func inputErr(field string, sample int, format string, a ...any) error {
	return &InputError{Field: field, Sample: sample, Detail: fmt.Sprintf(format, a...)}
}

// Run conditions a capture: it checks every track, computes its quality
// figures, makes its quaternions hemisphere-continuous, finds each sensor's
// mounting (explicit, else from the neutral-pose window, else identity) and
// resamples every track onto one uniform grid.
//
// The grid spans the intersection of the tracks' time spans, so that every
// grid sample has data from every track, starting at the latest first
// sample; its rate is opt.Rate or the highest effective track rate.
// Orientations are interpolated by SLERP (rot.SlerpPrecise), gyroscope and
// accelerometer readings linearly; both are rotated into the segment frame.
// Sample intervals longer than the bridging bound (Options.MaxGap) are not
// interpolated: grid samples strictly inside them are marked invalid and
// hold the nearest valid values.
//
// The mounting m of a track (q_segment = q_sensor ⊗ m*) is, in order of
// precedence: the track's explicit Mounting; with a neutral window, the one
// that makes the segment frame equal the world frame turned by one common
// heading over the window (NeutralMounting of the track's MeanOrientation
// over the window); otherwise the identity (sensor frame = segment frame).
// The common heading is the mean heading over the window of the first body
// segment with an explicit mounting (pelvis, thorax, then track order), so
// that explicit and calibrated segments agree; without one, that of the
// pelvis sensor's x axis, else the thorax sensor's, else the first track's.
// A static pose cannot reveal the player's facing in the sensors' world
// frame, so without an explicit body-segment mounting the calibrated segment
// frames differ from the anatomical ones by one rotation δ about each
// segment's own z axis (δ = the reference sensor's x-axis heading minus the
// facing; q_calibrated = q_true ⊗ Yaw(δ)). Speeds are unaffected (world
// angular velocity and the segment z component do not change); posture and
// joint angles are measured about segment x and y axes turned by δ, unless
// the reference sensor's x axis points forward (δ = 0).
//
// Every track must carry quaternions: raw inertial tracks are fused before
// Run. Errors are *InputError values.
func Run(c *capture.Capture, opt Options) (*Result, error) {
	if c == nil {
		return nil, inputErr("capture", -1, "missing")
	}
	if err := checkOptions(opt); err != nil {
		return nil, err
	}
	if len(c.Tracks) == 0 {
		return nil, inputErr("tracks", -1, "no tracks")
	}
	nmax := 0
	for i := range c.Tracks {
		if err := checkTrack(c, i); err != nil {
			return nil, err
		}
		nmax = max(nmax, c.Tracks[i].Len())
	}
	neutral := c.Neutral
	if opt.Neutral != nil {
		neutral = opt.Neutral
	}
	if neutral != nil && !(neutral.Start <= neutral.End) {
		return nil, inputErr("neutral", -1, "start %g s is after end %g s", neutral.Start, neutral.End)
	}

	r := &Result{Segments: make([]Segment, len(c.Tracks))}
	iv := make([]float64, 2*nmax)
	timings := make([]timing, len(c.Tracks))
	for i := range c.Tracks {
		timings[i] = trackTiming(c.Tracks[i].Time, opt.MaxGap, iv[:nmax], iv[nmax:])
	}

	g, err := grid(c, timings, opt.Rate)
	if err != nil {
		return nil, err
	}
	r.Grid = g

	mount, err := mountings(c, neutral, r)
	if err != nil {
		return nil, err
	}

	for i := range c.Tracks {
		t := &c.Tracks[i]
		tm := &timings[i]
		seg := &r.Segments[i]
		seg.Segment = t.Segment
		seg.SourceRate = 1 / tm.median
		seg.Mounting = mount[i].m
		seg.Calibrated = mount[i].calibrated
		flips := continuityFlips(t.Q)
		resample(g, t, tm.bound, seg)
		sat := saturation(t)
		seg.Quality = quality(t, tm, flips, sat)
		r.Warnings = append(r.Warnings, trackWarnings(t, tm, sat, g)...)
	}
	return r, nil
}

func checkOptions(opt Options) error {
	if !(opt.Rate >= 0) || opt.Rate > MaxRate {
		return inputErr("options.rate_hz", -1, "%g Hz outside 0..%d Hz", opt.Rate, MaxRate)
	}
	if !(opt.MaxGap >= 0) || math.IsInf(opt.MaxGap, 0) {
		return inputErr("options.max_gap", -1, "%g s is not a non-negative finite time", opt.MaxGap)
	}
	return nil
}

// checkTrack checks what Run relies on; the validate package normally
// guarantees it, but Run must not misbehave on a capture built otherwise.
func checkTrack(c *capture.Capture, i int) error {
	t := &c.Tracks[i]
	f := "tracks[" + strconv.Itoa(i) + "]"
	if t.Segment == kinchainv1.Segment_SEGMENT_UNSPECIFIED || kinchainv1.Segment_name[int32(t.Segment)] == "" {
		return inputErr(f+".segment", -1, "unspecified or unknown segment %d", t.Segment)
	}
	for j := 0; j < i; j++ {
		if c.Tracks[j].Segment == t.Segment {
			return inputErr(f+".segment", -1, "%s already given by tracks[%d]", t.Segment, j)
		}
	}
	if t.Q == nil {
		return inputErr(f+".qw", -1, "no quaternion columns for %s: tracks with raw inertial readings only must be fused before conditioning", t.Segment)
	}
	n := t.Len()
	if n < 2 {
		return inputErr(f+".time_s", -1, "%d samples, need at least 2", n)
	}
	if len(t.Q) != n {
		return inputErr(f+".qw", -1, "%d quaternions for %d sample times", len(t.Q), n)
	}
	if t.Gyro != nil && len(t.Gyro) != n {
		return inputErr(f+".gx", -1, "%d gyroscope samples for %d sample times", len(t.Gyro), n)
	}
	if t.Accel != nil && len(t.Accel) != n {
		return inputErr(f+".ax", -1, "%d accelerometer samples for %d sample times", len(t.Accel), n)
	}
	if x := t.Time[0]; math.IsNaN(x) || math.IsInf(x, 0) {
		return inputErr(f+".time_s", 0, "not finite")
	}
	if x := t.Time[n-1]; math.IsInf(x, 0) {
		return inputErr(f+".time_s", n-1, "not finite")
	}
	for k := 1; k < n; k++ {
		// The comparison also rejects NaN.
		if x := t.Time[k]; !(x > t.Time[k-1]) {
			return inputErr(f+".time_s", k, "%g s is not after the previous sample (%g s)", x, t.Time[k-1])
		}
	}
	for k, q := range t.Q {
		// |q|² within 2e-6 of 1: |q| within 1e-6.
		if d := rot.Dot(q, q) - 1; !(d < 2e-6 && d > -2e-6) {
			return inputErr(f+".qw", k, "quaternion norm %g is not 1", rot.Norm(q))
		}
	}
	if m := t.Mounting; m != nil {
		if n := rot.Norm(*m); !(math.Abs(n-1) < 1e-6) {
			return inputErr(f+".mounting", -1, "quaternion norm %g is not 1", n)
		}
	}
	return nil
}

// grid returns the common time base: the intersection of the track spans
// at the requested rate, or the highest effective track rate.
func grid(c *capture.Capture, tm []timing, rate float64) (Grid, error) {
	if rate == 0 {
		for i := range tm {
			rate = math.Max(rate, 1/tm[i].median)
		}
		// Absorb the rounding of sample times such as k/1000 s.
		if r := math.Round(rate); math.Abs(rate-r) <= 1e-6*r {
			rate = r
		}
		if rate > MaxRate {
			return Grid{}, inputErr("tracks", -1, "highest track rate %g Hz is above the limit %d Hz; set options.rate_hz", rate, MaxRate)
		}
	}
	start, end := math.Inf(-1), math.Inf(1)
	first, last := 0, 0
	for i := range c.Tracks {
		t := c.Tracks[i].Time
		if t[0] > start {
			start, first = t[0], i
		}
		if t[len(t)-1] < end {
			end, last = t[len(t)-1], i
		}
	}
	// Grid samples within 1e-6 of an interval past the end snap to it.
	span := (end - start) * rate
	if !(span >= 1-1e-6) {
		return Grid{}, inputErr("tracks", -1, "the tracks overlap for less than one grid interval: tracks[%d] (%s) starts at %g s, tracks[%d] (%s) ends at %g s",
			first, c.Tracks[first].Segment, start, last, c.Tracks[last].Segment, end)
	}
	if span >= MaxGridSamples {
		return Grid{}, inputErr("options.rate_hz", -1, "%g s at %g Hz exceeds %d grid samples", end-start, rate, MaxGridSamples)
	}
	return Grid{Start: start, Rate: rate, N: int(math.Floor(span+1e-6)) + 1}, nil
}

type mounting struct {
	m          quat.Number
	calibrated bool
}

// window returns the index range [lo, hi) of the samples of t in w.
func window(t []float64, w *capture.Window) (lo, hi int) {
	lo = sort.SearchFloat64s(t, w.Start)
	hi = sort.Search(len(t), func(i int) bool { return t[i] > w.End })
	return lo, hi
}

// mountings returns each track's mounting rotation and appends the
// neutral-window warnings to r.
func mountings(c *capture.Capture, w *capture.Window, r *Result) ([]mounting, error) {
	out := make([]mounting, len(c.Tracks))
	need := false
	for i := range c.Tracks {
		if m := c.Tracks[i].Mounting; m != nil {
			q, _ := rot.Normalize(*m)
			out[i] = mounting{m: q}
		} else {
			out[i] = mounting{m: rot.Identity}
			need = true
		}
	}
	if w == nil || !need {
		return out, nil
	}
	ref := headingReference(c)
	means := make([]quat.Number, len(c.Tracks))
	have := make([]bool, len(c.Tracks))
	mean := func(i int) error {
		t := &c.Tracks[i]
		lo, hi := window(t.Time, w)
		if lo >= hi {
			return inputErr("neutral", -1, "the window %g..%g s holds no sample of tracks[%d] (%s), which spans %g..%g s",
				w.Start, w.End, i, t.Segment, t.Time[0], t.Time[t.Len()-1])
		}
		m, ok := MeanOrientation(t.Q[lo:hi])
		if !ok {
			return inputErr("neutral", -1, "no mean orientation of tracks[%d] (%s) over the window", i, t.Segment)
		}
		means[i], have[i] = m, true
		worst, at := 0.0, lo
		for k := lo; k < hi; k++ {
			if a := rot.Angle(m, t.Q[k]); a > worst {
				worst, at = a, k
			}
		}
		if worst > NeutralStillLimit {
			r.Warnings = append(r.Warnings, warning(kinchainv1.WarningCode_WARNING_CODE_NEUTRAL_NOT_STILL, t.Segment, t.Time[at],
				"%s moved %.1f° from its mean orientation during the neutral-pose window (limit %.0f°); its calibration may be off",
				segName(t.Segment), worst*180/math.Pi, NeutralStillLimit*180/math.Pi))
		}
		return nil
	}
	if err := mean(ref); err != nil {
		return nil, err
	}
	heading := rot.Heading(rot.Mul(means[ref], rot.Conj(out[ref].m)))
	if c.Tracks[ref].Mounting == nil {
		r.Warnings = append(r.Warnings, warning(kinchainv1.WarningCode_WARNING_CODE_NEUTRAL_HEADING_ASSUMED, c.Tracks[ref].Segment, w.Start,
			"the facing direction in the neutral pose was taken from the %s sensor's x axis; unless that sensor points forward, "+
				"calibrated segments are turned about their long axes by its mounting yaw (speeds are unaffected; give an explicit "+
				"mounting for the pelvis or thorax to fix posture angles)", segName(c.Tracks[ref].Segment)))
	}
	for i := range c.Tracks {
		if c.Tracks[i].Mounting != nil {
			continue
		}
		if !have[i] {
			if err := mean(i); err != nil {
				return nil, err
			}
		}
		out[i] = mounting{m: NeutralMounting(means[i], heading), calibrated: true}
	}
	return out, nil
}

// headingReference returns the track whose heading over the neutral window
// sets the common heading: the first body-segment track with an explicit
// mounting in the order pelvis, thorax, then track order (its segment
// heading is then known, so calibrated and explicitly mounted segments
// agree); otherwise the pelvis, else the thorax, else the first track, whose
// sensor heading is used.
func headingReference(c *capture.Capture) int {
	body := func(i int) bool { return c.Tracks[i].Segment != kinchainv1.Segment_SEGMENT_CLUB }
	order := make([]int, 0, len(c.Tracks)+2)
	for _, s := range []kinchainv1.Segment{kinchainv1.Segment_SEGMENT_PELVIS, kinchainv1.Segment_SEGMENT_THORAX} {
		if i := trackIndex(c, s); i >= 0 {
			order = append(order, i)
		}
	}
	for i := range c.Tracks {
		order = append(order, i)
	}
	for _, i := range order {
		if c.Tracks[i].Mounting != nil && body(i) {
			return i
		}
	}
	return order[0]
}

func trackIndex(c *capture.Capture, s kinchainv1.Segment) int {
	for i := range c.Tracks {
		if c.Tracks[i].Segment == s {
			return i
		}
	}
	return -1
}

// snap is the fraction of a sample interval within which a grid time is
// taken to coincide with a sample.
const snap = 1e-9

// continuityFlips returns the number of samples Continuity would negate in
// q, without changing q: sample i ends up negated (sᵢ = −1) exactly when
// sᵢ₋₁·(q[i−1]·q[i]) < 0, s₀ = +1.
func continuityFlips(q []quat.Number) int {
	flips, neg := 0, false
	for i := 1; i < len(q); i++ {
		d := rot.Dot(q[i-1], q[i])
		neg = (d < 0) != neg
		if neg {
			flips++
		}
	}
	return flips
}

// resample fills seg.Q, seg.Valid, seg.Gyro and seg.Accel on grid g from
// track t, applying seg.Mounting. The track's quaternions are made
// hemisphere-continuous on the fly, as Continuity would (t.Q is not
// modified).
func resample(g Grid, t *capture.Track, bound float64, seg *Segment) {
	n := t.Len()
	ts := t.Time
	src := t.Q
	m := seg.Mounting
	mc := rot.Conj(m)
	seg.Q = make([]quat.Number, g.N)
	if t.Gyro != nil {
		seg.Gyro = make([]r3.Vec, g.N)
	}
	if t.Accel != nil {
		seg.Accel = make([]r3.Vec, g.N)
	}
	k := 0
	invalid := 0
	dt := g.Dt()
	// qa, qb: the continuity-fixed q[k], q[k+1].
	qa, qb := src[0], src[1]
	if rot.Dot(qa, qb) < 0 {
		qb = rot.Neg(qb)
	}
	for i := 0; i < g.N; i++ {
		tg := g.Start + float64(i)*dt
		for k < n-2 && ts[k+1] <= tg {
			k++
			qa, qb = qb, src[k+1]
			if rot.Dot(qa, qb) < 0 {
				qb = rot.Neg(qb)
			}
		}
		span := ts[k+1] - ts[k]
		u := (tg - ts[k]) / span
		var qq quat.Number
		switch {
		case u <= snap:
			u = 0
			qq = qa
		case u >= 1-snap:
			u = 1
			qq = qb
		default:
			qq = rot.SlerpPrecise(qa, qb, u)
			if span > bound {
				if seg.Valid == nil {
					seg.Valid = make([]bool, g.N)
					for j := 0; j < i; j++ {
						seg.Valid[j] = true
					}
				}
				invalid++
			}
		}
		if seg.Valid != nil {
			seg.Valid[i] = !(u > 0 && u < 1 && span > bound)
		}
		qo := rot.Mul(qq, mc)
		if i > 0 && rot.Dot(seg.Q[i-1], qo) < 0 {
			// Only possible when the grid skips source samples or the source
			// turns by nearly 180° per sample; keep the output continuous.
			qo = rot.Neg(qo)
		}
		seg.Q[i] = qo
		if seg.Gyro != nil {
			seg.Gyro[i] = rot.Rotate(m, lerp(t.Gyro[k], t.Gyro[k+1], u))
		}
		if seg.Accel != nil {
			seg.Accel[i] = rot.Rotate(m, lerp(t.Accel[k], t.Accel[k+1], u))
		}
	}
	if invalid > 0 {
		fillInvalid(seg)
		Continuity(seg.Q)
	}
}

func lerp(a, b r3.Vec, u float64) r3.Vec {
	switch u {
	case 0:
		return a
	case 1:
		return b
	}
	return r3.Vec{X: a.X + u*(b.X-a.X), Y: a.Y + u*(b.Y-a.Y), Z: a.Z + u*(b.Z-a.Z)}
}

// fillInvalid replaces the values at invalid grid samples with those of the
// nearest valid sample (the earlier one on ties). A segment with no valid
// sample keeps its interpolated values.
func fillInvalid(seg *Segment) {
	v := seg.Valid
	n := len(v)
	for i := 0; i < n; {
		if v[i] {
			i++
			continue
		}
		j := i
		for j < n && !v[j] {
			j++
		}
		left, right := i-1, j
		for k := i; k < j; k++ {
			src := -1
			switch {
			case left >= 0 && right < n:
				src = left
				if right-k < k-left {
					src = right
				}
			case left >= 0:
				src = left
			case right < n:
				src = right
			}
			if src < 0 {
				continue
			}
			seg.Q[k] = seg.Q[src]
			if seg.Gyro != nil {
				seg.Gyro[k] = seg.Gyro[src]
			}
			if seg.Accel != nil {
				seg.Accel[k] = seg.Accel[src]
			}
		}
		i = j
	}
}

// sensorRange holds the plateau findings of a track: the first sample of
// the first gyroscope and accelerometer plateau, −1 when there is none.
type sensorRange struct{ gyro, accel int }

func saturation(t *capture.Track) sensorRange {
	s := sensorRange{-1, -1}
	if t.Gyro != nil {
		if k, ok := plateau(t.Gyro, GyroPlateauFloor); ok {
			s.gyro = k
		}
	}
	if t.Accel != nil {
		if k, ok := plateau(t.Accel, AccelPlateauFloor); ok {
			s.accel = k
		}
	}
	return s
}

// quality returns the quality figures of track t.
func quality(t *capture.Track, tm *timing, flips int, sat sensorRange) *kinchainv1.TrackQuality {
	q := &kinchainv1.TrackQuality{
		Segment:                 t.Segment,
		Samples:                 int32(t.Len()),
		EffectiveRateHz:         1 / tm.median,
		JitterMs:                tm.jitter * 1000,
		Gaps:                    int32(len(tm.gaps)),
		LongestGapMs:            tm.longest * 1000,
		RenormalizedSamples:     int32(t.Renormalized),
		HemisphereFlips:         int32(flips),
		Fused:                   t.Fused,
		GyroSaturationSuspected: sat.gyro >= 0,
		AccelClippingSuspected:  sat.accel >= 0,
	}
	return q
}

// trackWarnings returns the warnings about track t.
func trackWarnings(t *capture.Track, tm *timing, sat sensorRange, g Grid) []*kinchainv1.Warning {
	var w []*kinchainv1.Warning
	name := segName(t.Segment)
	for j, k := range tm.gaps {
		if j == maxGapWarnings {
			break
		}
		msg := fmt.Sprintf("%s: %.1f ms without samples after %.4f s, longer than the %.1f ms bridging bound; not interpolated",
			name, (t.Time[k+1]-t.Time[k])*1000, t.Time[k], tm.bound*1000)
		if j == maxGapWarnings-1 && len(tm.gaps) > maxGapWarnings {
			msg += fmt.Sprintf(" (and %d more such gaps)", len(tm.gaps)-maxGapWarnings)
		}
		w = append(w, warning(kinchainv1.WarningCode_WARNING_CODE_GAP_NOT_BRIDGED, t.Segment, t.Time[k], "%s", msg))
	}
	if tm.jitter > JitterLimit*tm.median {
		w = append(w, warning(kinchainv1.WarningCode_WARNING_CODE_TIMING_JITTER, t.Segment, math.NaN(),
			"%s: sample intervals vary by %.3f ms (standard deviation) around a median of %.3f ms, more than %.0f %%",
			name, tm.jitter*1000, tm.median*1000, JitterLimit*100))
	}
	if t.Renormalized > 0 {
		w = append(w, warning(kinchainv1.WarningCode_WARNING_CODE_RENORMALIZED, t.Segment, math.NaN(),
			"%s: %d of %d quaternions were not of unit length and were rescaled", name, t.Renormalized, t.Len()))
	}
	if rate := 1 / tm.median; rate < LowRateFraction*g.Rate {
		w = append(w, warning(kinchainv1.WarningCode_WARNING_CODE_LOW_RATE, t.Segment, math.NaN(),
			"%s: sampled at %.1f Hz, less than %.0f %% of the %.1f Hz common rate; values between its samples are interpolated",
			name, rate, LowRateFraction*100, g.Rate))
	}
	if k := sat.gyro; k >= 0 {
		w = append(w, warning(kinchainv1.WarningCode_WARNING_CODE_GYRO_SATURATION, t.Segment, t.Time[k],
			"%s: gyroscope readings hold their largest value for %d or more samples from %.4f s; the sensor's range was probably exceeded",
			name, PlateauSamples, t.Time[k]))
	}
	if k := sat.accel; k >= 0 {
		w = append(w, warning(kinchainv1.WarningCode_WARNING_CODE_ACCEL_CLIPPING, t.Segment, t.Time[k],
			"%s: accelerometer readings hold their largest value for %d or more samples from %.4f s; the sensor's range was probably exceeded",
			name, PlateauSamples, t.Time[k]))
	}
	return w
}

// warning builds a warning; a NaN time leaves time_s unset.
func warning(code kinchainv1.WarningCode, s kinchainv1.Segment, t float64, format string, a ...any) *kinchainv1.Warning {
	w := &kinchainv1.Warning{Code: code, Segment: s, Message: fmt.Sprintf(format, a...)}
	if !math.IsNaN(t) {
		w.TimeS = &t
	}
	return w
}

// segNames holds the lower-case segment names as the API spells them
// without their prefix ("lead_forearm"); read-only after initialisation.
var segNames = func() map[kinchainv1.Segment]string {
	m := make(map[kinchainv1.Segment]string, len(kinchainv1.Segment_name))
	for v, n := range kinchainv1.Segment_name {
		m[kinchainv1.Segment(v)] = strings.ToLower(strings.TrimPrefix(n, "SEGMENT_"))
	}
	return m
}()

// segName returns the lower-case name of a segment ("lead_forearm").
func segName(s kinchainv1.Segment) string {
	if n, ok := segNames[s]; ok {
		return n
	}
	return s.String()
}
