package stream

import (
	"fmt"
	"math"
	"slices"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/capture"
	"github.com/kinchain/kinchain/internal/validate"
)

// accelCheckSamples is the number of a segment's first accelerometer
// samples whose median magnitude is checked against
// validate.MinMedianAccel (the unit check the unary analysis makes over a
// whole track; a stream makes it once, over its start).
const accelCheckSamples = 64

// rateSlack: a segment whose samples arrive faster than rateSlack × the
// header's rate_hz (counted over at least rateCheckSeconds) is rejected,
// since its ring would hold less than MaxBufferedSeconds.
const (
	rateSlack        = 1.5
	rateCheckSeconds = 1.0
)

// batchErr builds an error about track i of a batch.
func batchErr(i int, array string, sample int, r validate.Reason, format string, a ...any) *validate.Error {
	f := fmt.Sprintf("batch.tracks[%d]", i)
	if array != "" {
		f += "." + array
	}
	return &validate.Error{Field: f, Sample: sample, Reason: r, Detail: fmt.Sprintf(format, a...)}
}

// checkBatch checks b against the header and what the stream has received
// so far, without changing the session. It returns, for each track, the
// index of its segment's state (−1 for an empty track).
func (s *Session) checkBatch(b *kinchainv1.SampleBatch, idx []int) ([]int, error) {
	if b == nil {
		return idx, &validate.Error{Field: "batch", Sample: -1, Reason: validate.ReasonMissingField, Detail: "empty batch message"}
	}
	tracks := b.GetTracks()
	total := 0
	for _, t := range tracks {
		total += len(t.GetTimeS())
	}
	if total > s.lim.MaxBatchSamples {
		return idx, &validate.Error{Field: "batch.tracks", Sample: -1, Reason: validate.ReasonTooLarge,
			Detail: fmt.Sprintf("%d samples in one batch, more than the limit of %d; send smaller batches", total, s.lim.MaxBatchSamples)}
	}
	idx = idx[:0]
	var seen [16]int // segment enum → batch track + 1
	for i, t := range tracks {
		seg := t.GetSegment()
		if !knownSegment(seg) {
			detail := fmt.Sprintf("unknown segment %d", int32(seg))
			if seg == kinchainv1.Segment_SEGMENT_UNSPECIFIED {
				detail = "segment not set"
			}
			return idx, batchErr(i, "segment", -1, validate.ReasonUnknownSegment, "%s", detail)
		}
		k := s.bySeg[seg]
		if k < 0 {
			return idx, batchErr(i, "segment", -1, validate.ReasonUnknownSegment,
				"%s was not declared in the header's segments; declare every segment in the header", segmentName(seg))
		}
		if j := seen[seg]; j > 0 {
			return idx, batchErr(i, "segment", -1, validate.ReasonDuplicateSegment,
				"%s is already batch.tracks[%d]; send each segment at most once per batch", segmentName(seg), j-1)
		}
		seen[seg] = i + 1
		if err := s.checkTrack(i, t, s.segs[k]); err != nil {
			return idx, err
		}
		if len(t.GetTimeS()) == 0 {
			idx = append(idx, -1)
		} else {
			idx = append(idx, k)
		}
	}
	return idx, nil
}

// checkTrack checks track i of a batch against its segment's state st.
func (s *Session) checkTrack(i int, t *kinchainv1.Track, st *segState) error {
	name := st.name
	if t.GetMounting() != nil {
		return batchErr(i, "mounting", -1, validate.ReasonBadValue, "mountings go in the header (header.mountings), not in batches")
	}
	a := capture.TrackArrays(t)
	n := len(a[capture.ArrayTime])
	for k := 1; k < capture.NumArrays; k++ {
		if m := len(a[k]); m != 0 && m != n {
			return batchErr(i, capture.ArrayNames[k], -1, validate.ReasonLengthMismatch, "%d entries, but time_s has %d", m, n)
		}
	}
	if n == 0 {
		return nil
	}
	if lim := s.lim.batchTrackSamples(s.rate); n > lim {
		return batchErr(i, "time_s", -1, validate.ReasonTooLarge,
			"%d samples of %s in one batch, more than the %d (%s s at the header rate) a batch may carry per segment", n, name, lim, num(s.lim.MaxBatchSeconds))
	}
	var set columnSet = 1 << capture.ArrayTime
	for _, g := range groups {
		have, missing := 0, -1
		for k := g.first; k < g.first+g.n; k++ {
			if len(a[k]) > 0 {
				have++
			} else if missing < 0 {
				missing = k
			}
		}
		switch {
		case have == g.n:
			for k := g.first; k < g.first+g.n; k++ {
				set |= 1 << k
			}
		case have > 0:
			return batchErr(i, capture.ArrayNames[missing], -1, validate.ReasonMissingField, "empty while other %s arrays are set", g.what)
		}
	}
	hasQ, hasG, hasA := set.has(capture.ArrayQw), set.has(capture.ArrayGx), set.has(capture.ArrayAx)
	switch {
	case hasQ:
	case hasG && !hasA:
		return batchErr(i, "ax", -1, validate.ReasonMissingField, "%s has no quaternions, so it needs accelerometer arrays (ax, ay, az) besides the gyroscope", name)
	case hasA && !hasG:
		return batchErr(i, "gx", -1, validate.ReasonMissingField, "%s has no quaternions, so it needs gyroscope arrays (gx, gy, gz) besides the accelerometer", name)
	case !hasG:
		return batchErr(i, "qw", -1, validate.ReasonMissingField, "%s has no orientation: give quaternions (qw, qx, qy, qz) or raw inertial readings (gx, gy, gz and ax, ay, az)", name)
	}
	if st.ring != nil && set != st.ring.set {
		for k := 1; k < capture.NumArrays; k++ {
			switch {
			case st.ring.set.has(k) && !set.has(k):
				return batchErr(i, capture.ArrayNames[k], -1, validate.ReasonMissingField,
					"empty, but earlier batches of %s had it; a segment sends the same arrays for the whole stream", name)
			case !st.ring.set.has(k) && set.has(k):
				return batchErr(i, capture.ArrayNames[k], -1, validate.ReasonBadValue,
					"earlier batches of %s did not have it; a segment sends the same arrays for the whole stream", name)
			}
		}
	}
	if st.ring == nil {
		if b := s.bufferBytes + s.lim.ringCapacity(s.rate)*8*set.count(); b > s.lim.MaxBufferBytes {
			return batchErr(i, "", -1, validate.ReasonTooLarge,
				"buffering %d arrays of %s for %s s at %s Hz brings the stream's buffers to %d bytes, more than the limit of %d; send fewer arrays or a lower rate",
				set.count(), name, num(s.lim.MaxBufferedSeconds+s.lim.MaxBatchSeconds), num(s.rate), b, s.lim.MaxBufferBytes)
		}
	}

	ts := a[capture.ArrayTime]
	prev, have := st.last, st.n > 0
	for k, x := range ts {
		if !finite(x) {
			return batchErr(i, "time_s", k, validate.ReasonNonFinite, "not finite (%s)", num(x))
		}
		if have {
			if x < prev {
				where := "the previous sample"
				if k == 0 {
					where = "the last sample of the previous batch"
				}
				return batchErr(i, "time_s", k, validate.ReasonTimeOrder, "%s s is before %s of %s (%s s)", num(x), where, name, num(prev))
			}
			if x == prev {
				return batchErr(i, "time_s", k, validate.ReasonDuplicateTime, "same time as the previous sample of %s (%s s)", name, num(x))
			}
		}
		prev, have = x, true
	}
	if cnt, span := st.n+int64(n), prev-st.firstTime(ts[0]); span >= rateCheckSeconds {
		if r := float64(cnt-1) / span; r > rateSlack*s.rate {
			return batchErr(i, "time_s", -1, validate.ReasonRateOutOfRange,
				"%s arrives at %.4g Hz, more than %g × the header's rate_hz of %s Hz, which sizes the buffers", name, r, rateSlack, num(s.rate))
		}
	}

	var present [capture.NumArrays]int
	np := 0
	for k := 1; k < capture.NumArrays; k++ {
		if set.has(k) {
			present[np] = k
			np++
		}
	}
	var mags [accelCheckSamples]float64
	nm := st.accelN
	copy(mags[:], st.accelMags[:nm])
	for k := 0; k < n; k++ {
		for _, j := range present[:np] {
			if x := a[j][k]; !finite(x) {
				return batchErr(i, capture.ArrayNames[j], k, validate.ReasonNonFinite, "not finite (%s)", num(x))
			}
		}
		if hasQ {
			w, x, y, z := a[capture.ArrayQw][k], a[capture.ArrayQx][k], a[capture.ArrayQy][k], a[capture.ArrayQz][k]
			norm := math.Sqrt(w*w + x*x + y*y + z*z)
			switch {
			case norm < validate.ZeroNorm:
				return batchErr(i, "qw", k, validate.ReasonZeroQuaternion, "quaternion (%s, %s, %s, %s) is zero", num(w), num(x), num(y), num(z))
			case math.Abs(norm-1) > validate.UnitTolerance:
				return batchErr(i, "qw", k, validate.ReasonNotUnit, "quaternion (%s, %s, %s, %s) has norm %s, not 1 within %s",
					num(w), num(x), num(y), num(z), num(norm), num(validate.UnitTolerance))
			}
		}
		if hasG {
			for j := capture.ArrayGx; j <= capture.ArrayGz; j++ {
				if c := a[j][k]; math.Abs(c) > validate.MaxAngularRate {
					return batchErr(i, capture.ArrayNames[j], k, validate.ReasonImplausible,
						"%s rad/s is beyond any gyroscope's range (limit %s rad/s); is it in °/s? kinchain wants rad/s", num(c), num(validate.MaxAngularRate))
				}
			}
		}
		if hasA && !st.accelChecked && nm < accelCheckSamples {
			x, y, z := a[capture.ArrayAx][k], a[capture.ArrayAy][k], a[capture.ArrayAz][k]
			mags[nm] = math.Sqrt(x*x + y*y + z*z)
			nm++
			if nm == accelCheckSamples {
				m := mags
				slices.Sort(m[:])
				if med := (m[nm/2-1] + m[nm/2]) / 2; med < validate.MinMedianAccel {
					return batchErr(i, "ax", k, validate.ReasonImplausible,
						"the median accelerometer magnitude of the first %d samples of %s is %s, below %s m/s²: is it in g? kinchain wants m/s²",
						accelCheckSamples, name, num(med), num(validate.MinMedianAccel))
				}
			}
		}
	}
	return nil
}
