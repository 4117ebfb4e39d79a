// Package capture holds the validated, in-memory form of a capture: what the
// decoders and the validator produce and every later stage reads. Arrays are
// parallel to Time; optional arrays are nil when the track lacks them.
package capture

import (
	"gonum.org/v1/gonum/num/quat"
	"gonum.org/v1/gonum/spatial/r3"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
)

// Track is one sensor's samples.
type Track struct {
	Segment kinchainv1.Segment
	// Time holds the sample times in s, strictly increasing.
	Time []float64
	// Q holds unit quaternions, sensor frame → world frame, or nil when the
	// track carries raw inertial readings only.
	Q []quat.Number
	// Gyro is angular rate in the sensor frame, rad/s.
	Gyro []r3.Vec
	// Accel is specific force in the sensor frame, m/s².
	Accel []r3.Vec
	// Mag is the magnetic field in the sensor frame (µT or any unit).
	Mag []r3.Vec
	// Pos is the sensor position in the world frame, m.
	Pos []r3.Vec
	// Mounting, when non-nil, is the sensor frame's orientation in the
	// segment frame: q_segment = q_sensor ⊗ Mounting*.
	Mounting *quat.Number
	// Renormalized counts samples whose quaternion was rescaled to unit norm.
	Renormalized int
	// Fused reports that Q was estimated from raw inertial readings.
	Fused bool
}

// Len returns the number of samples.
func (t *Track) Len() int { return len(t.Time) }

// Window is a closed time interval in s.
type Window struct{ Start, End float64 }

// Capture is a validated capture.
type Capture struct {
	ID         string
	Handedness kinchainv1.Handedness
	Club       string
	Tracks     []Track
	// Neutral, when non-nil, is the neutral-pose window.
	Neutral *Window
	// TargetHeading, when non-nil, overrides the target-line heading (rad).
	TargetHeading *float64
	Metadata      map[string]string
}

// Track returns the track of segment s, or nil.
func (c *Capture) Track(s kinchainv1.Segment) *Track {
	for i := range c.Tracks {
		if c.Tracks[i].Segment == s {
			return &c.Tracks[i]
		}
	}
	return nil
}

// Samples returns the total number of samples over all tracks.
func (c *Capture) Samples() int {
	n := 0
	for i := range c.Tracks {
		n += len(c.Tracks[i].Time)
	}
	return n
}
