package stream

import (
	"fmt"
	"math"
)

// Limits bound what one stream may hold and send. A zero (or negative) field
// means the default given in its comment; DefaultLimits returns all
// defaults.
//
// Memory per stream is bounded by construction: each declared segment has one
// ring buffer of ceil((MaxBufferedSeconds + MaxBatchSeconds) × rate_hz)
// samples, one float64 per sample and array the segment sends (time plus 4
// quaternion components: 40 bytes a sample), allocated as samples arrive and
// never grown past that; MaxBufferBytes caps the sum over segments.
type Limits struct {
	// MaxBufferedSeconds is how much stream time each segment's ring buffer
	// holds at the header rate, s. The longest analysis window is PreRoll +
	// MaxBackswing + MaxDownswing + MaxFollowThrough + swing.FinishSettle +
	// PostRoll = 9.8 s; with less, the windows of the slowest swings are
	// shortened (with a warning). Default 12.
	MaxBufferedSeconds float64
	// MaxBatchSamples is the most samples (entries of time_s) one batch may
	// carry, summed over its tracks. Default 10,000 (1 s of ten segments at
	// 1 kHz).
	MaxBatchSamples int
	// MaxBatchSeconds bounds one track of a batch to
	// ceil(MaxBatchSeconds × rate_hz) samples, s. Default 1. The rings keep
	// this much room beyond MaxBufferedSeconds, so that a whole batch can be
	// appended before the swing windows it completes are copied out.
	MaxBatchSeconds float64
	// MaxSegments is the most segments a header may declare. Default 10 (all
	// of them).
	MaxSegments int
	// MinRateHz and MaxRateHz bound the header's rate_hz. Defaults 20 and
	// 10,000, the per-track rate range the unary analysis accepts
	// (validate.DefaultMinRate, validate.DefaultMaxRate).
	MinRateHz, MaxRateHz float64
	// MaxBufferBytes caps the ring buffers of one stream, bytes, summed over
	// segments for the arrays they actually send. Default 32 MiB.
	MaxBufferBytes int
	// MaxNeutralSeconds is the longest neutral-pose window (options.neutral)
	// a stream may ask for; its quaternions are kept until the window has
	// passed, s. Default 10.
	MaxNeutralSeconds float64
}

// Default limit values; see Limits for what each bounds.
const (
	DefaultMaxBufferedSeconds = 12.0
	DefaultMaxBatchSamples    = 10_000
	DefaultMaxBatchSeconds    = 1.0
	DefaultMaxSegments        = 10
	DefaultMinRateHz          = 20.0
	DefaultMaxRateHz          = 10_000.0
	DefaultMaxBufferBytes     = 32 << 20
	DefaultMaxNeutralSeconds  = 10.0
)

// DefaultLimits returns the documented default limits.
func DefaultLimits() Limits {
	return Limits{
		MaxBufferedSeconds: DefaultMaxBufferedSeconds,
		MaxBatchSamples:    DefaultMaxBatchSamples,
		MaxBatchSeconds:    DefaultMaxBatchSeconds,
		MaxSegments:        DefaultMaxSegments,
		MinRateHz:          DefaultMinRateHz,
		MaxRateHz:          DefaultMaxRateHz,
		MaxBufferBytes:     DefaultMaxBufferBytes,
		MaxNeutralSeconds:  DefaultMaxNeutralSeconds,
	}
}

// WithDefaults returns l with every zero, negative or non-finite field
// replaced by its default.
func (l Limits) WithDefaults() Limits {
	d := DefaultLimits()
	pos := func(v float64) bool { return v > 0 && !math.IsInf(v, 0) }
	if !pos(l.MaxBufferedSeconds) {
		l.MaxBufferedSeconds = d.MaxBufferedSeconds
	}
	if l.MaxBatchSamples <= 0 {
		l.MaxBatchSamples = d.MaxBatchSamples
	}
	if !pos(l.MaxBatchSeconds) {
		l.MaxBatchSeconds = d.MaxBatchSeconds
	}
	if l.MaxSegments <= 0 {
		l.MaxSegments = d.MaxSegments
	}
	if !pos(l.MinRateHz) {
		l.MinRateHz = d.MinRateHz
	}
	if !pos(l.MaxRateHz) {
		l.MaxRateHz = d.MaxRateHz
	}
	if l.MaxBufferBytes <= 0 {
		l.MaxBufferBytes = d.MaxBufferBytes
	}
	if !pos(l.MaxNeutralSeconds) {
		l.MaxNeutralSeconds = d.MaxNeutralSeconds
	}
	return l
}

// batchTrackSamples returns the most samples one track of a batch may carry
// at rate Hz.
func (l Limits) batchTrackSamples(rate float64) int {
	return int(math.Ceil(l.MaxBatchSeconds * rate))
}

// ringCapacity returns the samples each segment's ring holds at rate Hz.
func (l Limits) ringCapacity(rate float64) int {
	return int(math.Ceil(l.MaxBufferedSeconds*rate)) + l.batchTrackSamples(rate)
}

// String renders l for logs.
func (l Limits) String() string {
	return fmt.Sprintf("buffer %gs, batch ≤ %d samples and ≤ %gs a track, ≤ %d segments, rate %g–%g Hz, ≤ %d buffer bytes, neutral ≤ %gs",
		l.MaxBufferedSeconds, l.MaxBatchSamples, l.MaxBatchSeconds, l.MaxSegments, l.MinRateHz, l.MaxRateHz, l.MaxBufferBytes, l.MaxNeutralSeconds)
}
