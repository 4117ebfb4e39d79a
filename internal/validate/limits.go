package validate

// Limits bound what kinchain accepts. A zero (or negative) field means the
// default given in its comment; DefaultLimits returns all defaults.
//
// The defaults are sized for a long practice session: an hour at 100 Hz on
// ten sensors is 3.6 million samples, and the byte limit keeps a decoder's
// memory use bounded whatever the input claims.
type Limits struct {
	// MaxSamples is the most samples (entries of time_s) summed over all
	// tracks. Default 4,000,000.
	MaxSamples int
	// MaxTracks is the most tracks in one capture. Default 16 (there are
	// ten segments; the slack lets the duplicate check name the culprit).
	MaxTracks int
	// MaxDuration is the longest capture span (latest sample − earliest
	// sample over all tracks), s. Default 3600.
	MaxDuration float64
	// MinRate and MaxRate bound each track's rate, Hz, taken as 1/median
	// sample interval. Defaults 20 and 10,000: below 20 Hz a golf swing
	// (downswing ≈ 0.25 s) is a handful of samples; above 10 kHz no body
	// worn inertial sensor streams orientation (common practice, no source).
	MinRate, MaxRate float64
	// MinSamples is the fewest samples a track needs for the analysis.
	// Default 16; values below 2 act as 2 (a rate needs one interval).
	MinSamples int
	// MaxBytes is the largest encoded message (CSV, JSON or protobuf) the
	// decoders read, bytes. Default 64 MiB.
	MaxBytes int
}

// Default limit values; see Limits for what each bounds.
const (
	DefaultMaxSamples  = 4_000_000
	DefaultMaxTracks   = 16
	DefaultMaxDuration = 3600.0   // s
	DefaultMinRate     = 20.0     // Hz
	DefaultMaxRate     = 10_000.0 // Hz
	DefaultMinSamples  = 16
	DefaultMaxBytes    = 64 << 20 // bytes
)

// DefaultLimits returns the documented default limits.
func DefaultLimits() Limits {
	return Limits{
		MaxSamples:  DefaultMaxSamples,
		MaxTracks:   DefaultMaxTracks,
		MaxDuration: DefaultMaxDuration,
		MinRate:     DefaultMinRate,
		MaxRate:     DefaultMaxRate,
		MinSamples:  DefaultMinSamples,
		MaxBytes:    DefaultMaxBytes,
	}
}

// WithDefaults returns l with every zero or negative field replaced by its
// default, and MinSamples raised to at least 2.
func (l Limits) WithDefaults() Limits {
	d := DefaultLimits()
	if l.MaxSamples <= 0 {
		l.MaxSamples = d.MaxSamples
	}
	if l.MaxTracks <= 0 {
		l.MaxTracks = d.MaxTracks
	}
	if !(l.MaxDuration > 0) {
		l.MaxDuration = d.MaxDuration
	}
	if !(l.MinRate > 0) {
		l.MinRate = d.MinRate
	}
	if !(l.MaxRate > 0) {
		l.MaxRate = d.MaxRate
	}
	if l.MinSamples <= 0 {
		l.MinSamples = d.MinSamples
	}
	if l.MinSamples < 2 {
		l.MinSamples = 2
	}
	if l.MaxBytes <= 0 {
		l.MaxBytes = d.MaxBytes
	}
	return l
}
