package stream

import (
	"fmt"
	"math"
	"slices"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/condition"
	"github.com/kinchain/kinchain/internal/validate"
)

// medianIntervals is the number of a segment's first sample intervals whose
// median sets its gap bound (condition.GapBound) for the rest of the
// stream. The unary analysis takes the median over the whole track; a
// stream keeps no interval history.
const medianIntervals = 256

// trackStats are the running quality figures of one segment over the whole
// stream, in constant memory.
type trackStats struct {

	// The first intervals, for the gap bound.
	early  [medianIntervals]float64
	nEarly int
	bound  float64 // gap bound, s; from the nominal rate until early is full

	// Intervals that are not gaps (Welford's running mean and variance).
	ivN        int64
	ivMean     float64
	ivM2       float64
	gaps       int64
	longest    float64
	firstGapAt float64 // time of the first gap's earlier sample

	renorm int64
	flips  int64

	// Found by the swing analyses.
	gyroSat, accelClip bool
}

// init readies s for a segment at the nominal rate Hz.
func (s *trackStats) init(rate float64) {
	s.bound = condition.GapBound(1 / rate)
}

// interval records the sample interval d s ending at time t.
func (s *trackStats) interval(d, t float64) {
	s.longest = math.Max(s.longest, d)
	if s.nEarly < medianIntervals {
		s.early[s.nEarly] = d
		s.nEarly++
		if s.nEarly == medianIntervals {
			m := s.early
			slices.Sort(m[:])
			s.bound = condition.GapBound((m[medianIntervals/2-1] + m[medianIntervals/2]) / 2)
		}
	}
	if d > s.bound {
		if s.gaps == 0 {
			s.firstGapAt = t - d
		}
		s.gaps++
		return
	}
	s.ivN++
	delta := d - s.ivMean
	s.ivMean += delta / float64(s.ivN)
	s.ivM2 += delta * (d - s.ivMean)
}

// jitter returns the standard deviation of the intervals that are not
// gaps, s (sample standard deviation, as gonum's stat.StdDev that the
// unary analysis uses).
func (s *trackStats) jitter() float64 {
	if s.ivN < 2 {
		return 0
	}
	return math.Sqrt(s.ivM2 / float64(s.ivN-1))
}

// rate returns the effective rate, 1/mean interval (gaps excluded), Hz; 0
// with fewer than two samples.
func (s *trackStats) rate() float64 {
	if s.ivN == 0 {
		return 0
	}
	return 1 / s.ivMean
}

// quality returns the summary figures of segment seg with n samples.
func (s *trackStats) quality(seg kinchainv1.Segment, n int64, fused bool) *kinchainv1.TrackQuality {
	q := &kinchainv1.TrackQuality{
		Segment:                 seg,
		Samples:                 int32(min(n, math.MaxInt32)),
		EffectiveRateHz:         s.rate(),
		JitterMs:                s.jitter() * 1000,
		Gaps:                    int32(min(s.gaps, math.MaxInt32)),
		RenormalizedSamples:     int32(min(s.renorm, math.MaxInt32)),
		HemisphereFlips:         int32(min(s.flips, math.MaxInt32)),
		GyroSaturationSuspected: s.gyroSat,
		AccelClippingSuspected:  s.accelClip,
		Fused:                   fused,
	}
	if s.gaps > 0 {
		q.LongestGapMs = s.longest * 1000
	}
	return q
}

// warnings returns the stream-level data-quality warnings of segment seg,
// with the thresholds of the unary analysis (condition.JitterLimit,
// condition.LowRateFraction of the highest segment rate top Hz).
func (s *trackStats) warnings(seg kinchainv1.Segment, n int64, top float64) []*kinchainv1.Warning {
	var w []*kinchainv1.Warning
	name := segmentName(seg)
	if s.gaps > 0 {
		t := s.firstGapAt
		w = append(w, &kinchainv1.Warning{Code: kinchainv1.WarningCode_WARNING_CODE_GAP_NOT_BRIDGED, Segment: seg, TimeS: &t,
			Message: fmt.Sprintf("%s: %d intervals without samples longer than the %.1f ms bridging bound, the first after %.4f s, the longest %.1f ms; not interpolated",
				name, s.gaps, s.bound*1000, t, s.longest*1000)})
	}
	if r := s.rate(); r > 0 {
		if j := s.jitter(); j > condition.JitterLimit*s.ivMean {
			w = append(w, &kinchainv1.Warning{Code: kinchainv1.WarningCode_WARNING_CODE_TIMING_JITTER, Segment: seg,
				Message: fmt.Sprintf("%s: sample intervals vary by %.3f ms (standard deviation) around a mean of %.3f ms, more than %.0f %%",
					name, j*1000, s.ivMean*1000, condition.JitterLimit*100)})
		}
		if r < condition.LowRateFraction*top {
			w = append(w, &kinchainv1.Warning{Code: kinchainv1.WarningCode_WARNING_CODE_LOW_RATE, Segment: seg,
				Message: fmt.Sprintf("%s: sampled at %.1f Hz, less than %.0f %% of the %.1f Hz of the fastest segment; values between its samples are interpolated",
					name, r, condition.LowRateFraction*100, top)})
		}
	}
	if s.renorm > 0 {
		w = append(w, &kinchainv1.Warning{Code: kinchainv1.WarningCode_WARNING_CODE_RENORMALIZED, Segment: seg,
			Message: fmt.Sprintf("%s: %d of %d quaternions were not of unit length and were rescaled", name, s.renorm, n)})
	}
	return w
}

// renormCounted reports whether a quaternion of norm n counts as
// renormalised (validate.RenormCount).
func renormCounted(n float64) bool { return math.Abs(n-1) > validate.RenormCount }
