package synth

import (
	"fmt"
	"math"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
)

// Defaults of Config. A zero field means its default.
const (
	DefaultRate          = 1000 // Hz
	DefaultSwings        = 1
	DefaultLeadIn        = 1.0  // s of still address before the first movement
	DefaultPause         = 1.0  // s of still re-address before the next takeaway
	DefaultTail          = 1.0  // s of still finish after the last swing
	DefaultTempo         = 3.0  // backswing : downswing
	DefaultDownswing     = 0.25 // s, top → impact
	DefaultThoraxFlexion = 38.0 // °, forward bend of the thorax at address
	DefaultDropoutMs     = 20.0 // ms, length of each dropout
	DefaultImpactShock   = 400.0
	// HalfSwingScale is the fraction of the full swing's amplitudes and
	// speeds that a half swing has.
	HalfSwingScale = 0.35
	// WaggleAmplitude is the club's backswing angle in a waggle, °.
	WaggleAmplitude = 30.0
)

// Hold and move times of the timeline, s.
const (
	finishHold  = 0.6 // still at the finish before returning to address
	returnTime  = 1.2 // finish → address
	waggleTime  = 0.6 // out and back
	waggleStill = 0.8 // still after a waggle
)

// Config describes a synthetic capture. The zero value is one right-handed
// full swing sampled at 1000 Hz with quaternions only, no noise and all ten
// segments.
type Config struct {
	// Seed drives every random choice (noise, jitter, dropouts, mountings,
	// swing variation); equal configs give identical captures.
	Seed int64
	// Rate is the sample rate of every track, Hz; 0: 1000.
	Rate float64
	// SegmentRates overrides Rate for single segments (mixed rates).
	SegmentRates map[kinchainv1.Segment]float64
	// StartTime is the time of the first sample, s.
	StartTime float64
	// Handedness of the player; unspecified means right. A left-handed
	// player is the mirror image of the right-handed model through the
	// target-line frame's x–z plane; lead and trail keep their names.
	Handedness kinchainv1.Handedness
	// TargetHeadingDeg is the direction toward the target in the world,
	// degrees counter-clockwise from world +x about +z.
	TargetHeadingDeg float64
	// RecordTargetHeading writes TargetHeadingDeg into the capture's
	// target_heading_deg; otherwise the analysis derives the frame from
	// the pelvis.
	RecordTargetHeading bool
	// Swings is the number of full swings; 0: 1.
	Swings int
	// Waggles and HalfSwings are movements before the first full swing
	// that the analysis should reject: waggles of the club and hands
	// (WaggleAmplitude), then half swings (HalfSwingScale of the swing).
	Waggles, HalfSwings int
	// LeadIn, Pause and Tail are still times, s (0: defaults): before the
	// first movement, between re-address and the next takeaway, and after
	// the last swing's finish.
	LeadIn, Pause, Tail float64
	// Duration of the capture, s; 0: as long as the timeline needs. A
	// longer duration lengthens the still tail.
	Duration float64
	// Tempo is the ratio backswing (takeaway → top) : downswing
	// (top → impact); 0: 3.
	Tempo float64
	// Downswing is the top → impact time, s; 0: 0.25. Every downswing time
	// offset scales with it and every speed inversely, so amplitudes stay.
	Downswing float64
	// ThoraxFlexionDeg is the thorax's forward bend at address, °; 0: 38.
	ThoraxFlexionDeg float64
	// SwingVariation varies each full swing's speeds by a uniform random
	// factor in 1 ± SwingVariation (at most 0.1).
	SwingVariation float64
	// LateThorax makes the thorax reverse late and peak after the lead
	// upper arm.
	LateThorax bool
	// EarlyRelease makes the club peak 45 ms before impact, before the lead
	// arm and hand ("casting").
	EarlyRelease bool
	// Segments is the subset of segments to write; nil: all ten.
	Segments []kinchainv1.Segment
	// Dropouts is the number of gaps cut into randomly chosen tracks at
	// random times, each DropoutMs long (0: 20 ms).
	Dropouts  int
	DropoutMs float64
	// JitterMs is the standard deviation of white timing jitter added to
	// each sample time, ms (clipped to ±40 % of the sample interval).
	JitterMs float64
	// NoiseDeg is the standard deviation of white orientation noise, per
	// axis of a small rotation applied to each sample, degrees.
	NoiseDeg float64
	// MountingDeg, when positive, turns each sensor against its segment by
	// a constant rotation of this angle about a random axis; the rotation
	// is written into the track's mounting field.
	MountingDeg float64
	// HemisphereFlips negates randomly chosen quaternions (q and −q are the
	// same rotation), as some devices do.
	HemisphereFlips bool
	// IMU adds gyroscope and accelerometer columns: the ideal readings of
	// the model in the sensor frame, plus white noise of the given standard
	// deviation and a constant random bias of the given magnitude.
	IMU                   bool
	GyroNoise, GyroBias   float64 // rad/s
	AccelNoise, AccelBias float64 // m/s²
	// Magnetometer adds magnetometer columns (µT) of a uniform field.
	Magnetometer bool
	// OmitQuaternions leaves out the quaternion columns (raw inertial
	// tracks; needs IMU).
	OmitQuaternions bool
	// ImpactShock is the amplitude of the ball-strike shock in the club's
	// accelerometer at impact, m/s²; 0: 400; negative: none.
	ImpactShock float64
}

// resolved returns cfg with defaults filled in, or an error naming the
// field.
func (cfg Config) resolved() (Config, error) {
	c := cfg
	def := func(v *float64, d float64) {
		if *v == 0 {
			*v = d
		}
	}
	def(&c.Rate, DefaultRate)
	def(&c.LeadIn, DefaultLeadIn)
	def(&c.Pause, DefaultPause)
	def(&c.Tail, DefaultTail)
	def(&c.Tempo, DefaultTempo)
	def(&c.Downswing, DefaultDownswing)
	def(&c.ThoraxFlexionDeg, DefaultThoraxFlexion)
	def(&c.DropoutMs, DefaultDropoutMs)
	def(&c.ImpactShock, DefaultImpactShock)
	if c.Swings == 0 {
		c.Swings = DefaultSwings
	}
	bad := func(field string, v any, want string) error {
		return fmt.Errorf("synth: Config.%s = %v: %s", field, v, want)
	}
	finite := func(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }
	switch {
	case !(c.Rate >= 10 && c.Rate <= 10000):
		return c, bad("Rate", c.Rate, "must be in 10..10000 Hz")
	case !finite(c.StartTime):
		return c, bad("StartTime", c.StartTime, "must be finite")
	case !finite(c.TargetHeadingDeg):
		return c, bad("TargetHeadingDeg", c.TargetHeadingDeg, "must be finite")
	case c.Swings < 0 || c.Swings > 20:
		return c, bad("Swings", c.Swings, "must be in 0..20")
	case c.Waggles < 0 || c.Waggles > 10:
		return c, bad("Waggles", c.Waggles, "must be in 0..10")
	case c.HalfSwings < 0 || c.HalfSwings > 10:
		return c, bad("HalfSwings", c.HalfSwings, "must be in 0..10")
	case !(c.LeadIn >= 0.2 && c.LeadIn <= 60):
		return c, bad("LeadIn", c.LeadIn, "must be in 0.2..60 s")
	case !(c.Pause >= 0.2 && c.Pause <= 60):
		return c, bad("Pause", c.Pause, "must be in 0.2..60 s")
	case !(c.Tail >= 0.05 && c.Tail <= 60):
		return c, bad("Tail", c.Tail, "must be in 0.05..60 s")
	case !(c.Duration >= 0 && c.Duration <= 600):
		return c, bad("Duration", c.Duration, "must be in 0..600 s")
	case !(c.Tempo >= 1.5 && c.Tempo <= 6):
		return c, bad("Tempo", c.Tempo, "must be in 1.5..6")
	case !(c.Downswing >= 0.15 && c.Downswing <= 0.8):
		return c, bad("Downswing", c.Downswing, "must be in 0.15..0.8 s")
	case !(c.ThoraxFlexionDeg > 0 && c.ThoraxFlexionDeg <= 70):
		return c, bad("ThoraxFlexionDeg", c.ThoraxFlexionDeg, "must be in (0, 70]°")
	case !(c.SwingVariation >= 0 && c.SwingVariation <= 0.1):
		return c, bad("SwingVariation", c.SwingVariation, "must be in 0..0.1")
	case c.Dropouts < 0 || c.Dropouts > 1000:
		return c, bad("Dropouts", c.Dropouts, "must be in 0..1000")
	case !(c.DropoutMs > 0 && c.DropoutMs <= 2000):
		return c, bad("DropoutMs", c.DropoutMs, "must be in (0, 2000] ms")
	case !(c.JitterMs >= 0 && c.JitterMs <= 100):
		return c, bad("JitterMs", c.JitterMs, "must be in 0..100 ms")
	case !(c.NoiseDeg >= 0 && c.NoiseDeg <= 20):
		return c, bad("NoiseDeg", c.NoiseDeg, "must be in 0..20°")
	case !(c.MountingDeg >= 0 && c.MountingDeg <= 180):
		return c, bad("MountingDeg", c.MountingDeg, "must be in 0..180°")
	case !(c.GyroNoise >= 0 && c.GyroBias >= 0 && finite(c.GyroNoise) && finite(c.GyroBias)):
		return c, bad("GyroNoise/GyroBias", [2]float64{c.GyroNoise, c.GyroBias}, "must be finite and not negative")
	case !(c.AccelNoise >= 0 && c.AccelBias >= 0 && finite(c.AccelNoise) && finite(c.AccelBias)):
		return c, bad("AccelNoise/AccelBias", [2]float64{c.AccelNoise, c.AccelBias}, "must be finite and not negative")
	case !finite(c.ImpactShock):
		return c, bad("ImpactShock", c.ImpactShock, "must be finite")
	case c.OmitQuaternions && !c.IMU:
		return c, bad("OmitQuaternions", true, "needs IMU (a track needs quaternions or inertial readings)")
	}
	switch c.Handedness {
	case kinchainv1.Handedness_HANDEDNESS_UNSPECIFIED:
		c.Handedness = kinchainv1.Handedness_HANDEDNESS_RIGHT
	case kinchainv1.Handedness_HANDEDNESS_RIGHT, kinchainv1.Handedness_HANDEDNESS_LEFT:
	default:
		return c, bad("Handedness", c.Handedness, "unknown value")
	}
	for s, r := range c.SegmentRates {
		if !validSegment(s) {
			return c, bad("SegmentRates", s, "unknown segment")
		}
		if !(r >= 10 && r <= 10000) {
			return c, bad(fmt.Sprintf("SegmentRates[%v]", s), r, "must be in 10..10000 Hz")
		}
	}
	if c.Segments == nil {
		c.Segments = AllSegments
	} else {
		if len(c.Segments) == 0 {
			return c, bad("Segments", "[]", "must name at least one segment (nil means all)")
		}
		seen := map[kinchainv1.Segment]bool{}
		for i, s := range c.Segments {
			if !validSegment(s) {
				return c, bad(fmt.Sprintf("Segments[%d]", i), s, "unknown segment")
			}
			if seen[s] {
				return c, bad(fmt.Sprintf("Segments[%d]", i), s, "listed twice")
			}
			seen[s] = true
		}
	}
	return c, nil
}

func validSegment(s kinchainv1.Segment) bool {
	return s >= pelvis && s <= club
}

// rate returns the sample rate of segment s, Hz.
func (cfg *Config) rate(s kinchainv1.Segment) float64 {
	if r, ok := cfg.SegmentRates[s]; ok {
		return r
	}
	return cfg.Rate
}
