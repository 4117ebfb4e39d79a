package validate

import (
	"errors"
	"strconv"
	"strings"
)

// Reason classifies a validation or decoding failure. The set is small and
// fixed, so a Reason can be used as a Prometheus label value.
type Reason string

// The reasons. Each constant's comment says when it is used.
const (
	// ReasonNonFinite: a value is NaN or ±Inf (also a CSV number that
	// overflows float64).
	ReasonNonFinite Reason = "non_finite"
	// ReasonZeroQuaternion: a quaternion has (near) zero norm, below
	// ZeroNorm.
	ReasonZeroQuaternion Reason = "zero_quaternion"
	// ReasonNotUnit: a sample quaternion's norm is further than UnitTolerance
	// from 1.
	ReasonNotUnit Reason = "not_unit"
	// ReasonTimeOrder: a sample time is before the previous one.
	ReasonTimeOrder Reason = "time_order"
	// ReasonDuplicateTime: a sample time equals the previous one.
	ReasonDuplicateTime Reason = "duplicate_time"
	// ReasonLengthMismatch: a non-empty array has a different length than
	// time_s.
	ReasonLengthMismatch Reason = "length_mismatch"
	// ReasonUnknownSegment: a segment is unspecified, out of the enum's
	// range, or (CSV) not one of the lower-case names.
	ReasonUnknownSegment Reason = "unknown_segment"
	// ReasonDuplicateSegment: two tracks have the same segment.
	ReasonDuplicateSegment Reason = "duplicate_segment"
	// ReasonUnknownColumn: a CSV header names a column kinchain does not
	// know.
	ReasonUnknownColumn Reason = "unknown_column"
	// ReasonMissingColumn: a CSV header lacks a required column, or has only
	// part of a column group (qw qx qy qz, gx gy gz, ...).
	ReasonMissingColumn Reason = "missing_column"
	// ReasonDuplicateColumn: a CSV header names a column twice.
	ReasonDuplicateColumn Reason = "duplicate_column"
	// ReasonMissingField: a required field or array is absent: part of a
	// group of arrays, a track without orientation or raw inertial arrays,
	// an empty CSV cell where the segment has values on other rows, a
	// request without a capture.
	ReasonMissingField Reason = "missing_field"
	// ReasonEmpty: a capture without tracks or a track without samples.
	ReasonEmpty Reason = "empty"
	// ReasonTooFewSamples: a track has fewer samples than Limits.MinSamples.
	ReasonTooFewSamples Reason = "too_few_samples"
	// ReasonRateOutOfRange: a track's rate (from its median sample
	// interval) is outside [Limits.MinRate, Limits.MaxRate].
	ReasonRateOutOfRange Reason = "rate_out_of_range"
	// ReasonTooLarge: a size limit is exceeded (bytes, samples, tracks,
	// duration).
	ReasonTooLarge Reason = "too_large"
	// ReasonImplausible: values no sensor produces in SI units, most likely
	// the wrong unit (gyroscope in deg/s, accelerometer in g).
	ReasonImplausible Reason = "implausible"
	// ReasonMalformed: the bytes do not parse: CSV syntax, unparsable
	// numbers, wrong field counts, JSON syntax or types, truncated or
	// corrupt protobuf.
	ReasonMalformed Reason = "malformed"
	// ReasonBadValue: a value parses but is not allowed (an enum number out
	// of range, an unknown handedness word, a misplaced metadata key).
	ReasonBadValue Reason = "bad_value"
	// ReasonBadWindow: the neutral window is empty, reversed or outside the
	// capture.
	ReasonBadWindow Reason = "bad_window"
	// ReasonBadOption: an analysis option is out of its range.
	ReasonBadOption Reason = "bad_option"
	// ReasonOther: ReasonOf's answer for an error that is not an *Error.
	ReasonOther Reason = "other"
)

// AllReasons returns every Reason, for pre-registering metric label values.
func AllReasons() []Reason {
	return []Reason{
		ReasonNonFinite, ReasonZeroQuaternion, ReasonNotUnit, ReasonTimeOrder,
		ReasonDuplicateTime, ReasonLengthMismatch, ReasonUnknownSegment,
		ReasonDuplicateSegment, ReasonUnknownColumn, ReasonMissingColumn,
		ReasonDuplicateColumn, ReasonMissingField, ReasonEmpty,
		ReasonTooFewSamples, ReasonRateOutOfRange, ReasonTooLarge,
		ReasonImplausible, ReasonMalformed, ReasonBadValue, ReasonBadWindow,
		ReasonBadOption, ReasonOther,
	}
}

// Error is a validation or decoding failure. It names the field (a path in
// the proto message, e.g. "tracks[2].time_s", or a CSV column or metadata
// key), the sample index within that field (-1 if none) and the line of the
// input text (CSV, or JSON when known; 0 if none).
type Error struct {
	// Field is the path of the offending field, "" when none applies (for
	// example a CSV row with the wrong number of fields).
	Field string
	// Sample is the index into the field's array, -1 if none.
	Sample int
	// Line is the 1-based line of the input text, 0 if unknown.
	Line int
	// Reason classifies the failure.
	Reason Reason
	// Detail says what is wrong, for people.
	Detail string
}

// Error formats e as "field[sample] (line N): detail", leaving out the parts
// that are unknown ("line N: detail" when there is no field).
func (e *Error) Error() string {
	var b strings.Builder
	b.WriteString(e.Field)
	if e.Sample >= 0 && e.Field != "" {
		b.WriteByte('[')
		b.WriteString(strconv.Itoa(e.Sample))
		b.WriteByte(']')
	}
	if e.Line > 0 {
		if b.Len() > 0 {
			b.WriteString(" (line ")
			b.WriteString(strconv.Itoa(e.Line))
			b.WriteByte(')')
		} else {
			b.WriteString("line ")
			b.WriteString(strconv.Itoa(e.Line))
		}
	}
	if b.Len() > 0 {
		b.WriteString(": ")
	}
	b.WriteString(e.Detail)
	return b.String()
}

// ReasonOf returns the Reason of the first *Error in err's tree, "" for a
// nil err and ReasonOther for any other error.
func ReasonOf(err error) Reason {
	if err == nil {
		return ""
	}
	var e *Error
	if errors.As(err, &e) {
		return e.Reason
	}
	return ReasonOther
}

// Locator maps a sample to the line of the input file it came from, so that
// errors found after decoding still point into the file. Line returns 0 when
// it does not know.
type Locator interface {
	Line(track, sample int) int
}

// newErr builds an *Error without sample or line.
func newErr(field string, r Reason, detail string) *Error {
	return &Error{Field: field, Sample: -1, Reason: r, Detail: detail}
}

// Errors returns the *Error values in err's tree, in order, at most max of
// them (max ≤ 0: no bound); errors.Join and wrapping are followed.
func Errors(err error, max int) []*Error {
	var out []*Error
	var walk func(error)
	walk = func(e error) {
		if e == nil || (max > 0 && len(out) >= max) {
			return
		}
		if ve, ok := e.(*Error); ok {
			out = append(out, ve)
			return
		}
		switch u := e.(type) {
		case interface{ Unwrap() []error }:
			for _, x := range u.Unwrap() {
				walk(x)
			}
		case interface{ Unwrap() error }:
			walk(u.Unwrap())
		}
	}
	walk(err)
	return out
}
