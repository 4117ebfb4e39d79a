package validate

import (
	"fmt"
	"maps"
	"math"
	"slices"
	"strconv"
	"strings"

	"gonum.org/v1/gonum/num/quat"
	"gonum.org/v1/gonum/spatial/r3"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/capture"
)

// Thresholds on sample values.
const (
	// ZeroNorm: a quaternion whose norm is below this is reported as zero
	// (ReasonZeroQuaternion): an all-zero quaternion is what many sensors
	// send before their filter has started.
	ZeroNorm = 1e-6
	// UnitTolerance: a sample quaternion q with |‖q‖ − 1| > UnitTolerance is
	// rejected (ReasonNotUnit); closer ones are divided by ‖q‖. 1 % admits
	// quaternions rounded to 14-bit fixed point (error ≈ 1e-4) and catches
	// raw integer outputs (‖q‖ = 2¹⁴) and non-quaternion columns.
	UnitTolerance = 0.01
	// RenormCount: samples with |‖q‖ − 1| > RenormCount are counted in
	// capture.Track.Renormalized. Every sample is normalised, but float32
	// rounding (≈ 1e-7) is not worth a warning.
	RenormCount = 1e-6
	// MaxAngularRate bounds each gyroscope component, rad/s. The widest
	// range MEMS gyroscopes measure ±4000 °/s ≈ 70 rad/s (from memory);
	// 200 rad/s ≈ 11,500 °/s is beyond any of them, while a body segment
	// swinging at a few hundred °/s exceeds it when the data are in °/s, the
	// usual unit mistake.
	MaxAngularRate = 200.0
	// MinMedianAccel: a track whose median accelerometer magnitude is below
	// this, m/s², is rejected as not being in m/s². A sensor near the
	// Earth's surface reads about 9.81 m/s² at rest and a swing adds to it;
	// data in g read about 1 (common practice, no source).
	MinMedianAccel = 2.0
)

// groups are the arrays that must be present together.
var groups = [...][]int{
	{capture.ArrayQw, capture.ArrayQx, capture.ArrayQy, capture.ArrayQz},
	{capture.ArrayGx, capture.ArrayGy, capture.ArrayGz},
	{capture.ArrayAx, capture.ArrayAy, capture.ArrayAz},
	{capture.ArrayMx, capture.ArrayMy, capture.ArrayMz},
	{capture.ArrayPx, capture.ArrayPy, capture.ArrayPz},
}

// segmentName returns the lower-case name of s ("lead_upper_arm").
func segmentName(s kinchainv1.Segment) string {
	if n, ok := kinchainv1.Segment_name[int32(s)]; ok && s != 0 {
		return strings.ToLower(strings.TrimPrefix(n, "SEGMENT_"))
	}
	return strconv.Itoa(int(s))
}

// num formats an input value exactly (shortest round-trip form).
func num(v float64) string { return strconv.FormatFloat(v, 'g', -1, 64) }

// approx formats a derived value (a rate, a norm) to six digits.
func approx(v float64) string { return strconv.FormatFloat(v, 'g', 6, 64) }

// samples returns "1 sample" or "n samples".
func samples(n int) string {
	if n == 1 {
		return "1 sample"
	}
	return strconv.Itoa(n) + " samples"
}

// Capture checks c against the rules below and lim (zero fields: defaults)
// and returns its in-memory form. loc, when non-nil, supplies file lines for
// the errors. The result does not share memory with c.
//
// It returns the first problem found, checking in this order:
//
//  1. the capture: present, has tracks, at most MaxTracks tracks and
//     MaxSamples samples, a known handedness, a finite target_heading_deg;
//  2. each track in turn: a known segment not used before; samples at all;
//     every non-empty array as long as time_s; the groups (qw qx qy qz),
//     (gx gy gz), (ax ay az), (mx my mz), (px py pz) complete or absent;
//     orientation given as quaternions or as gyroscope plus accelerometer;
//     at least MinSamples samples; finite, strictly increasing times; a span
//     within MaxDuration; a rate (1/median interval) within MinRate..MaxRate;
//     then sample by sample: finite values, quaternions neither zero
//     (ZeroNorm) nor off unit length (UnitTolerance), gyroscope components
//     within MaxAngularRate; then the median accelerometer magnitude
//     (MinMedianAccel); then a finite, non-zero mounting quaternion;
//  3. the capture span within MaxDuration, and the neutral window: finite,
//     start before end, inside the span of the samples.
//
// Quaternions, sample and mounting, are normalised to unit length; samples
// that needed more than rounding (RenormCount) are counted in
// Track.Renormalized. target_heading_deg is converted to radians.
func Capture(c *kinchainv1.Capture, lim Limits, loc Locator) (*capture.Capture, error) {
	lim = lim.WithDefaults()
	v := checker{lim: lim, loc: loc}
	if c == nil {
		return nil, newErr("capture", ReasonMissingField, "no capture given")
	}
	if len(c.GetTracks()) == 0 {
		return nil, newErr("tracks", ReasonEmpty, "the capture has no tracks")
	}
	if n := len(c.GetTracks()); n > lim.MaxTracks {
		return nil, newErr("tracks", ReasonTooLarge, fmt.Sprintf("%d tracks, more than the limit of %d", n, lim.MaxTracks))
	}
	total := 0
	for _, t := range c.GetTracks() {
		total += len(t.GetTimeS())
	}
	if total > lim.MaxSamples {
		return nil, newErr("tracks", ReasonTooLarge, fmt.Sprintf("%d samples in all, more than the limit of %d", total, lim.MaxSamples))
	}
	if h := c.GetHandedness(); !enumKnown(h.Descriptor().Values(), int32(h)) {
		return nil, newErr("handedness", ReasonBadValue, fmt.Sprintf("unknown handedness %d", int32(h)))
	}
	out := &capture.Capture{
		ID:         c.GetCaptureId(),
		Handedness: c.GetHandedness(),
		Club:       c.GetClub(),
		Metadata:   maps.Clone(c.GetMetadata()),
		Tracks:     make([]capture.Track, len(c.GetTracks())),
	}
	if c.TargetHeadingDeg != nil {
		h := c.GetTargetHeadingDeg()
		if !finite(h) {
			return nil, newErr("target_heading_deg", ReasonNonFinite, "not finite ("+num(h)+")")
		}
		rad := h * math.Pi / 180
		out.TargetHeading = &rad
	}
	seen := map[kinchainv1.Segment]int{}
	first, last := math.Inf(1), math.Inf(-1)
	for i, t := range c.GetTracks() {
		if err := v.track(i, t, seen, &out.Tracks[i]); err != nil {
			return nil, err
		}
		tt := out.Tracks[i].Time
		first = math.Min(first, tt[0])
		last = math.Max(last, tt[len(tt)-1])
	}
	if span := last - first; span > lim.MaxDuration {
		return nil, newErr("tracks", ReasonTooLarge, fmt.Sprintf("the tracks span %s s (%s s to %s s), more than the limit of %s s", num(span), num(first), num(last), num(lim.MaxDuration)))
	}
	if w := c.GetNeutral(); w != nil {
		if err := window("neutral", w, ReasonBadWindow); err != nil {
			return nil, err
		}
		if err := windowInside("neutral", w, first, last); err != nil {
			return nil, err
		}
		out.Neutral = &capture.Window{Start: w.GetStartS(), End: w.GetEndS()}
	}
	return out, nil
}

// Request validates a whole request: its options (Options) and its capture
// (Capture), and checks that options.neutral, when set, lies inside the
// capture. Field paths are relative to the request ("capture.tracks[0].qw",
// "options.cutoff_hz").
func Request(r *kinchainv1.AnalyzeCaptureRequest, lim Limits, loc Locator) (*capture.Capture, error) {
	if r.GetCapture() == nil {
		return nil, newErr("capture", ReasonMissingField, "the request has no capture")
	}
	if err := OptionsWithin(r.GetOptions(), lim); err != nil {
		return nil, err
	}
	c, err := Capture(r.GetCapture(), lim, loc)
	if err != nil {
		if e, ok := err.(*Error); ok {
			e.Field = "capture." + e.Field
		}
		return nil, err
	}
	if w := r.GetOptions().GetNeutral(); w != nil {
		first, last := math.Inf(1), math.Inf(-1)
		for _, t := range c.Tracks {
			first = math.Min(first, t.Time[0])
			last = math.Max(last, t.Time[len(t.Time)-1])
		}
		if e := windowInside("options.neutral", w, first, last); e != nil {
			e.Reason = ReasonBadOption
			return nil, e
		}
	}
	return c, nil
}

type checker struct {
	lim Limits
	loc Locator
}

// line returns the file line of sample k of track i, 0 if unknown.
func (v *checker) line(i, k int) int {
	if v.loc == nil || k < 0 {
		return 0
	}
	return v.loc.Line(i, k)
}

// sampleErr is an error at sample k of array name of track i.
func (v *checker) sampleErr(i int, name string, k int, r Reason, detail string) *Error {
	return &Error{Field: fmt.Sprintf("tracks[%d].%s", i, name), Sample: k, Line: v.line(i, k), Reason: r, Detail: detail}
}

// trackErr is an error about track i's field name as a whole; the line is
// that of the track's first sample.
func (v *checker) trackErr(i int, name string, r Reason, detail string) *Error {
	f := fmt.Sprintf("tracks[%d]", i)
	if name != "" {
		f += "." + name
	}
	return &Error{Field: f, Sample: -1, Line: v.line(i, 0), Reason: r, Detail: detail}
}

func (v *checker) track(i int, t *kinchainv1.Track, seen map[kinchainv1.Segment]int, out *capture.Track) error {
	seg := t.GetSegment()
	if seg == kinchainv1.Segment_SEGMENT_UNSPECIFIED {
		return v.trackErr(i, "segment", ReasonUnknownSegment, "segment not set")
	}
	if _, ok := kinchainv1.Segment_name[int32(seg)]; !ok {
		return v.trackErr(i, "segment", ReasonUnknownSegment, fmt.Sprintf("unknown segment %d", int32(seg)))
	}
	if j, dup := seen[seg]; dup {
		return v.trackErr(i, "segment", ReasonDuplicateSegment, fmt.Sprintf("%s is already tracks[%d]", segmentName(seg), j))
	}
	seen[seg] = i
	name := segmentName(seg)
	a := capture.TrackArrays(t)
	n := len(a[capture.ArrayTime])
	if n == 0 {
		return v.trackErr(i, "time_s", ReasonEmpty, name+" has no samples")
	}
	for k := 1; k < capture.NumArrays; k++ {
		if m := len(a[k]); m != 0 && m != n {
			return v.trackErr(i, capture.ArrayNames[k], ReasonLengthMismatch, fmt.Sprintf("%d entries, but time_s has %d", m, n))
		}
	}
	for _, g := range groups {
		var set []string
		missing := -1
		for _, k := range g {
			if len(a[k]) > 0 {
				set = append(set, capture.ArrayNames[k])
			} else if missing < 0 {
				missing = k
			}
		}
		if len(set) > 0 && missing >= 0 {
			return v.trackErr(i, capture.ArrayNames[missing], ReasonMissingField, "empty while "+strings.Join(set, ", ")+" are set")
		}
	}
	hasQ, hasG, hasA := len(a[capture.ArrayQw]) > 0, len(a[capture.ArrayGx]) > 0, len(a[capture.ArrayAx]) > 0
	switch {
	case hasQ:
	case hasG && !hasA:
		return v.trackErr(i, "ax", ReasonMissingField, name+" has no quaternions, so it needs accelerometer arrays (ax, ay, az) besides the gyroscope")
	case hasA && !hasG:
		return v.trackErr(i, "gx", ReasonMissingField, name+" has no quaternions, so it needs gyroscope arrays (gx, gy, gz) besides the accelerometer")
	case !hasG:
		return v.trackErr(i, "qw", ReasonMissingField, name+" has no orientation: give quaternions (qw, qx, qy, qz) or raw inertial readings (gx, gy, gz and ax, ay, az)")
	}
	if n < v.lim.MinSamples {
		return v.trackErr(i, "time_s", ReasonTooFewSamples, fmt.Sprintf("%s has %s; the analysis needs at least %d", name, samples(n), v.lim.MinSamples))
	}
	ts := a[capture.ArrayTime]
	for k, x := range ts {
		if !finite(x) {
			return v.sampleErr(i, "time_s", k, ReasonNonFinite, "not finite ("+num(x)+")")
		}
		if k == 0 {
			continue
		}
		if p := ts[k-1]; x < p {
			return v.sampleErr(i, "time_s", k, ReasonTimeOrder, fmt.Sprintf("not after the previous sample (%s s ≤ %s s)", num(x), num(p)))
		} else if x == p {
			return v.sampleErr(i, "time_s", k, ReasonDuplicateTime, fmt.Sprintf("same time as the previous sample (%s s)", num(x)))
		}
	}
	if span := ts[n-1] - ts[0]; span > v.lim.MaxDuration {
		return v.trackErr(i, "time_s", ReasonTooLarge, fmt.Sprintf("%s spans %s s, more than the limit of %s s", name, num(span), num(v.lim.MaxDuration)))
	}
	if rate, med := Rate(ts); rate < v.lim.MinRate || rate > v.lim.MaxRate {
		return v.trackErr(i, "time_s", ReasonRateOutOfRange, fmt.Sprintf("%s runs at %s Hz (median interval %s s); accepted %s–%s Hz", name, approx(rate), approx(med), num(v.lim.MinRate), num(v.lim.MaxRate)))
	}

	out.Segment = seg
	out.Time = slices.Clone(ts)
	if hasQ {
		out.Q = make([]quat.Number, n)
	}
	vec := func(has bool) []r3.Vec {
		if has {
			return make([]r3.Vec, n)
		}
		return nil
	}
	out.Gyro, out.Accel = vec(hasG), vec(hasA)
	out.Mag, out.Pos = vec(len(a[capture.ArrayMx]) > 0), vec(len(a[capture.ArrayPx]) > 0)
	present := make([]int, 0, capture.NumArrays-1)
	for k := 1; k < capture.NumArrays; k++ {
		if len(a[k]) > 0 {
			present = append(present, k)
		}
	}
	for k := 0; k < n; k++ {
		for _, j := range present {
			if x := a[j][k]; !finite(x) {
				return v.sampleErr(i, capture.ArrayNames[j], k, ReasonNonFinite, "not finite ("+num(x)+")")
			}
		}
		if hasQ {
			q := quat.Number{Real: a[capture.ArrayQw][k], Imag: a[capture.ArrayQx][k], Jmag: a[capture.ArrayQy][k], Kmag: a[capture.ArrayQz][k]}
			norm := math.Sqrt(q.Real*q.Real + q.Imag*q.Imag + q.Jmag*q.Jmag + q.Kmag*q.Kmag)
			switch d := math.Abs(norm - 1); {
			case norm < ZeroNorm:
				return v.sampleErr(i, "qw", k, ReasonZeroQuaternion, fmt.Sprintf("quaternion (%s, %s, %s, %s) is zero", num(q.Real), num(q.Imag), num(q.Jmag), num(q.Kmag)))
			case d > UnitTolerance:
				return v.sampleErr(i, "qw", k, ReasonNotUnit, fmt.Sprintf("quaternion (%s, %s, %s, %s) has norm %s, not 1 within %s", num(q.Real), num(q.Imag), num(q.Jmag), num(q.Kmag), approx(norm), num(UnitTolerance)))
			case d > RenormCount:
				out.Renormalized++
			}
			s := 1 / norm
			out.Q[k] = quat.Number{Real: q.Real * s, Imag: q.Imag * s, Jmag: q.Jmag * s, Kmag: q.Kmag * s}
		}
		if hasG {
			g := r3.Vec{X: a[capture.ArrayGx][k], Y: a[capture.ArrayGy][k], Z: a[capture.ArrayGz][k]}
			for j, c := range [3]float64{g.X, g.Y, g.Z} {
				if math.Abs(c) > MaxAngularRate {
					return v.sampleErr(i, capture.ArrayNames[capture.ArrayGx+j], k, ReasonImplausible, fmt.Sprintf("%s rad/s is beyond any gyroscope's range (limit %s rad/s); is it in °/s? kinchain wants rad/s", num(c), num(MaxAngularRate)))
				}
			}
			out.Gyro[k] = g
		}
		if hasA {
			out.Accel[k] = r3.Vec{X: a[capture.ArrayAx][k], Y: a[capture.ArrayAy][k], Z: a[capture.ArrayAz][k]}
		}
		if out.Mag != nil {
			out.Mag[k] = r3.Vec{X: a[capture.ArrayMx][k], Y: a[capture.ArrayMy][k], Z: a[capture.ArrayMz][k]}
		}
		if out.Pos != nil {
			out.Pos[k] = r3.Vec{X: a[capture.ArrayPx][k], Y: a[capture.ArrayPy][k], Z: a[capture.ArrayPz][k]}
		}
	}
	if hasA {
		mags := make([]float64, n)
		for k, x := range out.Accel {
			mags[k] = r3.Norm(x)
		}
		if med := median(mags); med < MinMedianAccel {
			return v.trackErr(i, "ax", ReasonImplausible, fmt.Sprintf("the median accelerometer magnitude of %s is %s, below %s m/s²: is it in g? kinchain wants m/s²", name, approx(med), num(MinMedianAccel)))
		}
	}
	if m := t.GetMounting(); m != nil {
		q := quat.Number{Real: m.GetW(), Imag: m.GetX(), Jmag: m.GetY(), Kmag: m.GetZ()}
		for _, c := range [4]float64{q.Real, q.Imag, q.Jmag, q.Kmag} {
			if !finite(c) {
				return v.trackErr(i, "mounting", ReasonNonFinite, fmt.Sprintf("mounting of %s is not finite (%s)", name, num(c)))
			}
		}
		norm := math.Sqrt(q.Real*q.Real + q.Imag*q.Imag + q.Jmag*q.Jmag + q.Kmag*q.Kmag)
		if norm < ZeroNorm {
			return v.trackErr(i, "mounting", ReasonZeroQuaternion, fmt.Sprintf("mounting of %s is the zero quaternion", name))
		}
		q = quat.Scale(1/norm, q)
		out.Mounting = &q
	}
	return nil
}

// Rate returns a track's rate, 1/median(t[k+1] − t[k]) in Hz, and that
// median interval in s. The median of an even count is the mean of the two
// middle values. Rate needs at least two samples; with fewer it returns 0, 0.
func Rate(t []float64) (rate, interval float64) {
	if len(t) < 2 {
		return 0, 0
	}
	d := make([]float64, len(t)-1)
	for k := range d {
		d[k] = t[k+1] - t[k]
	}
	interval = median(d)
	return 1 / interval, interval
}

// median sorts x in place and returns its median.
func median(x []float64) float64 {
	slices.Sort(x)
	n := len(x)
	if n%2 == 1 {
		return x[n/2]
	}
	return (x[n/2-1] + x[n/2]) / 2
}

func finite(x float64) bool { return !math.IsNaN(x) && !math.IsInf(x, 0) }

// window checks that w has finite bounds and start < end.
func window(field string, w *kinchainv1.TimeWindow, r Reason) *Error {
	s, e := w.GetStartS(), w.GetEndS()
	if !finite(s) {
		return &Error{Field: field + ".start_s", Sample: -1, Reason: pick(r, ReasonNonFinite), Detail: "not finite (" + num(s) + ")"}
	}
	if !finite(e) {
		return &Error{Field: field + ".end_s", Sample: -1, Reason: pick(r, ReasonNonFinite), Detail: "not finite (" + num(e) + ")"}
	}
	if !(s < e) {
		return &Error{Field: field, Sample: -1, Reason: r, Detail: fmt.Sprintf("start %s s is not before end %s s", num(s), num(e))}
	}
	return nil
}

// pick returns ReasonBadOption for option fields and alt otherwise.
func pick(r, alt Reason) Reason {
	if r == ReasonBadOption {
		return r
	}
	return alt
}

// windowInside checks that w lies within [first, last].
func windowInside(field string, w *kinchainv1.TimeWindow, first, last float64) *Error {
	if s := w.GetStartS(); s < first {
		return &Error{Field: field + ".start_s", Sample: -1, Reason: ReasonBadWindow, Detail: fmt.Sprintf("%s s is before the first sample (%s s)", num(s), num(first))}
	}
	if e := w.GetEndS(); e > last {
		return &Error{Field: field + ".end_s", Sample: -1, Reason: ReasonBadWindow, Detail: fmt.Sprintf("%s s is after the last sample (%s s)", num(e), num(last))}
	}
	return nil
}
