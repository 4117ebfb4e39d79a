package stream

import (
	"fmt"
	"math"
	"strconv"
	"strings"

	"gonum.org/v1/gonum/num/quat"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/validate"
)

// maxHeaderString bounds capture_id and club, bytes: a session keeps them
// for its whole life.
const maxHeaderString = 1024

// headerErr builds a header error without a sample index.
func headerErr(field string, r validate.Reason, format string, a ...any) *validate.Error {
	return &validate.Error{Field: field, Sample: -1, Reason: r, Detail: fmt.Sprintf(format, a...)}
}

// num formats a float for error messages.
func num(v float64) string { return strconv.FormatFloat(v, 'g', -1, 64) }

func finite(x float64) bool { return !math.IsNaN(x) && !math.IsInf(x, 0) }

// segmentName returns the lower-case name of s ("lead_upper_arm"), or its
// number when s is not a known segment.
func segmentName(s kinchainv1.Segment) string {
	if n, ok := kinchainv1.Segment_name[int32(s)]; ok && s != kinchainv1.Segment_SEGMENT_UNSPECIFIED {
		return strings.ToLower(strings.TrimPrefix(n, "SEGMENT_"))
	}
	return strconv.Itoa(int(s))
}

// knownSegment reports whether s is a segment the API defines (not
// unspecified).
func knownSegment(s kinchainv1.Segment) bool {
	_, ok := kinchainv1.Segment_name[int32(s)]
	return ok && s != kinchainv1.Segment_SEGMENT_UNSPECIFIED
}

// checkHeader checks h against lim (with defaults applied) and returns the
// normalised mountings (nil when the header has none). Errors name fields
// under "header.".
func checkHeader(h *kinchainv1.StreamHeader, lim Limits) ([]*quat.Number, error) {
	if h == nil {
		return nil, headerErr("header", validate.ReasonMissingField, "the stream has no header; its first message must be one")
	}
	if n := len(h.GetCaptureId()); n > maxHeaderString {
		return nil, headerErr("header.capture_id", validate.ReasonTooLarge, "%d bytes, more than the limit of %d", n, maxHeaderString)
	}
	if n := len(h.GetClub()); n > maxHeaderString {
		return nil, headerErr("header.club", validate.ReasonTooLarge, "%d bytes, more than the limit of %d", n, maxHeaderString)
	}
	switch r := h.GetRateHz(); {
	case r == 0:
		return nil, headerErr("header.rate_hz", validate.ReasonMissingField, "required: the nominal sample rate of the stream, Hz, which sizes its buffers")
	case !finite(r):
		return nil, headerErr("header.rate_hz", validate.ReasonNonFinite, "not finite (%s)", num(r))
	case r < lim.MinRateHz || r > lim.MaxRateHz:
		return nil, headerErr("header.rate_hz", validate.ReasonRateOutOfRange, "%s Hz is outside the accepted %s–%s Hz", num(r), num(lim.MinRateHz), num(lim.MaxRateHz))
	}
	segs := h.GetSegments()
	if len(segs) == 0 {
		return nil, headerErr("header.segments", validate.ReasonEmpty, "no segments declared; list every segment the batches will carry")
	}
	if len(segs) > lim.MaxSegments {
		return nil, headerErr("header.segments", validate.ReasonTooLarge, "%d segments, more than the limit of %d", len(segs), lim.MaxSegments)
	}
	seen := map[kinchainv1.Segment]int{}
	for i, s := range segs {
		if !knownSegment(s) {
			detail := fmt.Sprintf("unknown segment %d", int32(s))
			if s == kinchainv1.Segment_SEGMENT_UNSPECIFIED {
				detail = "segment not set"
			}
			return nil, &validate.Error{Field: "header.segments", Sample: i, Reason: validate.ReasonUnknownSegment, Detail: detail}
		}
		if j, dup := seen[s]; dup {
			return nil, &validate.Error{Field: "header.segments", Sample: i, Reason: validate.ReasonDuplicateSegment,
				Detail: fmt.Sprintf("%s is already header.segments[%d]", segmentName(s), j)}
		}
		seen[s] = i
	}
	if hd := h.GetHandedness(); kinchainv1.Handedness_name[int32(hd)] == "" {
		return nil, headerErr("header.handedness", validate.ReasonBadValue, "unknown handedness %d", int32(hd))
	}
	if h.TargetHeadingDeg != nil && !finite(h.GetTargetHeadingDeg()) {
		return nil, headerErr("header.target_heading_deg", validate.ReasonNonFinite, "not finite (%s)", num(h.GetTargetHeadingDeg()))
	}
	if err := validate.OptionsWithin(h.GetOptions(), validate.Limits{MinRate: lim.MinRateHz, MaxRate: lim.MaxRateHz}); err != nil {
		if ve, ok := err.(*validate.Error); ok {
			c := *ve
			c.Field = "header." + c.Field
			return nil, &c
		}
		return nil, err
	}
	if w := h.GetOptions().GetNeutral(); w != nil {
		if d := w.GetEndS() - w.GetStartS(); d > lim.MaxNeutralSeconds {
			return nil, headerErr("header.options.neutral", validate.ReasonBadOption,
				"the neutral-pose window lasts %s s; a stream keeps at most %s s of it", num(d), num(lim.MaxNeutralSeconds))
		}
	}
	var mounts []*quat.Number
	if ms := h.GetMountings(); len(ms) > 0 {
		if len(ms) != len(segs) {
			return nil, headerErr("header.mountings", validate.ReasonLengthMismatch, "%d mountings for %d segments: give one per segment, or none", len(ms), len(segs))
		}
		mounts = make([]*quat.Number, len(ms))
		for i, m := range ms {
			if m == nil {
				return nil, &validate.Error{Field: "header.mountings", Sample: i, Reason: validate.ReasonMissingField, Detail: "mounting not set"}
			}
			q := quat.Number{Real: m.GetW(), Imag: m.GetX(), Jmag: m.GetY(), Kmag: m.GetZ()}
			for _, c := range [4]float64{q.Real, q.Imag, q.Jmag, q.Kmag} {
				if !finite(c) {
					return nil, &validate.Error{Field: "header.mountings", Sample: i, Reason: validate.ReasonNonFinite,
						Detail: fmt.Sprintf("mounting of %s is not finite (%s)", segmentName(segs[i]), num(c))}
				}
			}
			norm := math.Sqrt(q.Real*q.Real + q.Imag*q.Imag + q.Jmag*q.Jmag + q.Kmag*q.Kmag)
			if norm < validate.ZeroNorm {
				return nil, &validate.Error{Field: "header.mountings", Sample: i, Reason: validate.ReasonZeroQuaternion,
					Detail: fmt.Sprintf("mounting of %s is the zero quaternion", segmentName(segs[i]))}
			}
			q = quat.Scale(1/norm, q)
			mounts[i] = &q
		}
	}
	// The smallest buffers the segments can have: time and quaternion.
	if b := len(segs) * lim.ringCapacity(h.GetRateHz()) * 8 * 5; b > lim.MaxBufferBytes {
		return nil, headerErr("header.rate_hz", validate.ReasonTooLarge,
			"%d segments at %s Hz need at least %d bytes of buffers for %s s each, more than the limit of %d bytes",
			len(segs), num(h.GetRateHz()), b, num(lim.MaxBufferedSeconds+lim.MaxBatchSeconds), lim.MaxBufferBytes)
	}
	return mounts, nil
}
