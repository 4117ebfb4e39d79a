package kinematics

import (
	"gonum.org/v1/gonum/num/quat"
	"gonum.org/v1/gonum/spatial/r3"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/condition"
)

// Segment is one segment's motion on the common grid.
type Segment struct {
	Segment kinchainv1.Segment
	// Q is the segment orientation (segment → world), from conditioning.
	Q []quat.Number
	// Valid is as in condition.Segment (nil means all valid), with valid
	// samples that have no valid neighbour (no angular velocity) also marked
	// invalid. Omega, OmegaBody and Speed are zero at invalid samples.
	Valid []bool
	// Omega is the filtered angular velocity in the world frame, rad/s.
	Omega []r3.Vec
	// OmegaBody is the filtered angular velocity in the segment frame, rad/s:
	// Omega[i] expressed in the frame Q[i].
	OmegaBody []r3.Vec
	// Speed is the scalar speed per the selected definition, rad/s, from the
	// filtered angular velocity.
	Speed []float64
	// Accel is the accelerometer reading in the segment frame, m/s², or nil.
	Accel []r3.Vec
	// Cutoff is the low-pass cutoff applied, Hz; 0 when unfiltered.
	Cutoff float64
	// SourceRate is the track's own effective rate, Hz.
	SourceRate float64
}

// Result is the kinematics of a conditioned capture.
type Result struct {
	Grid     condition.Grid
	Speed    kinchainv1.SpeedDefinition
	Segments []Segment
	// Warnings holds this stage's warnings only; the conditioning warnings
	// stay in condition.Result.
	Warnings []*kinchainv1.Warning
}

// Segment returns segment s, or nil when it is absent.
func (r *Result) Segment(s kinchainv1.Segment) *Segment {
	for i := range r.Segments {
		if r.Segments[i].Segment == s {
			return &r.Segments[i]
		}
	}
	return nil
}
