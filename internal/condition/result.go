package condition

import (
	"gonum.org/v1/gonum/num/quat"
	"gonum.org/v1/gonum/spatial/r3"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
)

// Grid is a uniform time base: sample i is at Start + i/Rate seconds.
type Grid struct {
	Start float64 // s
	Rate  float64 // Hz
	N     int
}

// Time returns the time of sample i, s.
func (g Grid) Time(i int) float64 { return g.Start + float64(i)/g.Rate }

// Dt returns the sample interval, s.
func (g Grid) Dt() float64 { return 1 / g.Rate }

// Segment is one segment's conditioned orientation on the common grid.
type Segment struct {
	Segment kinchainv1.Segment
	// SourceRate is the track's own effective rate, Hz.
	SourceRate float64
	// Q is the segment frame's orientation in the world frame, one entry per
	// grid sample, hemisphere-continuous (Dot(Q[i], Q[i+1]) ≥ 0).
	Q []quat.Number
	// Valid is false for grid samples outside the track's time span or inside
	// a gap that was not bridged; nil means every sample is valid. Q holds the
	// nearest valid orientation there, so that arrays stay dense.
	Valid []bool
	// Gyro is the gyroscope reading rotated into the segment frame and
	// resampled onto the grid, rad/s; nil when the track has none.
	Gyro []r3.Vec
	// Accel is the accelerometer reading in the segment frame, m/s²; nil
	// when the track has none.
	Accel []r3.Vec
	// Quality describes the input track.
	Quality *kinchainv1.TrackQuality
	// Mounting is the sensor frame's orientation in the segment frame that
	// was applied (q_segment = q_sensor ⊗ Mounting*): the track's explicit
	// mounting, the neutral-pose calibration, or the identity.
	Mounting quat.Number
	// Calibrated reports that Mounting came from the neutral-pose window.
	Calibrated bool
}

// Result is a conditioned capture.
type Result struct {
	Grid     Grid
	Segments []Segment
	Warnings []*kinchainv1.Warning
}

// Segment returns the conditioned segment s, or nil when it is absent.
func (r *Result) Segment(s kinchainv1.Segment) *Segment {
	for i := range r.Segments {
		if r.Segments[i].Segment == s {
			return &r.Segments[i]
		}
	}
	return nil
}
