package synth

import (
	"gonum.org/v1/gonum/spatial/r3"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
)

// Segment shorthands.
const (
	pelvis    = kinchainv1.Segment_SEGMENT_PELVIS
	thorax    = kinchainv1.Segment_SEGMENT_THORAX
	head      = kinchainv1.Segment_SEGMENT_HEAD
	leadArm   = kinchainv1.Segment_SEGMENT_LEAD_UPPER_ARM
	leadFore  = kinchainv1.Segment_SEGMENT_LEAD_FOREARM
	leadHand  = kinchainv1.Segment_SEGMENT_LEAD_HAND
	trailArm  = kinchainv1.Segment_SEGMENT_TRAIL_UPPER_ARM
	trailFore = kinchainv1.Segment_SEGMENT_TRAIL_FOREARM
	trailHand = kinchainv1.Segment_SEGMENT_TRAIL_HAND
	club      = kinchainv1.Segment_SEGMENT_CLUB
)

// AllSegments lists the ten segments of the model in enum order.
var AllSegments = []kinchainv1.Segment{pelvis, thorax, head, leadArm, leadFore, leadHand, trailArm, trailFore, trailHand, club}

// spec is the invented design of one segment's motion through a full swing
// with the default 0.25 s downswing. Times are offsets in s: start from the
// takeaway, trans from the top, peak from impact. Angles in degrees, speeds
// in °/s. All numbers are our own invention, chosen to look like a skilled
// player (see the package comment); none is a measurement.
type spec struct {
	body bool // pelvis, thorax, head: Cardan angles; else a swing-plane drive

	start, trans, peak float64
	speed              float64 // peak speed of the drive angle, °/s
	amp                float64 // backswing amplitude, °; 0: solved from returnAt
	returnAt           float64 // with amp == 0: time from impact of the return to address, s
	finish             float64 // drive angle at rest after the follow-through, °

	// Body segments: flexion and lateral bend at address, at the segment's
	// transition, at its peak speed and at rest after the follow-through.
	flex, lat [4]float64

	// Swing-plane segments: address direction of the segment's −z axis
	// (its "pointer": shoulder→elbow, elbow→wrist, wrist→fingers, grip→club
	// head) and a reference for its x axis, both in the right-handed
	// target-line frame; roll about the segment's own z axis at the
	// transition, the peak and at rest (0 at address).
	pointer, xref r3.Vec
	roll          [3]float64

	// waggle is the drive's share of a waggle (club 1).
	waggle float64

	// Sensor placement for the accelerometer model: the segment's proximal
	// joint, in its parent's frame (the pelvis: in the target-line frame),
	// and the sensor, in the segment's frame, m.
	parent kinchainv1.Segment
	joint  r3.Vec
	sensor r3.Vec
}

// defaultSpecs is the model golfer (right-handed, target-line frame).
func defaultSpecs() map[kinchainv1.Segment]*spec {
	return map[kinchainv1.Segment]*spec{
		pelvis: {
			body: true, start: 0.05, trans: -0.045, peak: -0.075, speed: 580, amp: 50, finish: 80,
			flex: [4]float64{12, 12, 10, 4}, lat: [4]float64{0, -8, 8, 4},
			joint: r3.Vec{Z: 0.95}, sensor: r3.Vec{X: -0.10, Z: 0.05},
		},
		thorax: {
			body: true, start: 0.03, trans: -0.030, peak: -0.050, speed: 820, amp: 90, finish: 105,
			flex: [4]float64{38, 30, 32, 15}, lat: [4]float64{8, -20, 25, 10},
			parent: pelvis, joint: r3.Vec{Z: 0.10}, sensor: r3.Vec{X: -0.10, Z: 0.30},
		},
		head: {
			body: true, start: 0.05, trans: -0.010, peak: -0.020, speed: 150, amp: 8, finish: 40,
			flex: [4]float64{30, 28, 30, 22}, lat: [4]float64{0, -5, 5, 2},
			parent: thorax, joint: r3.Vec{Z: 0.45}, sensor: r3.Vec{Z: 0.12},
		},
		leadArm: {
			start: 0.01, trans: -0.020, peak: -0.030, speed: 1150, amp: 130, finish: 200,
			pointer: r3.Vec{X: 0.22, Y: -0.20, Z: -0.95}, xref: r3.Vec{X: 1}, roll: [3]float64{-30, 0, 40},
			waggle: 0.15, parent: thorax, joint: r3.Vec{Y: 0.18, Z: 0.40}, sensor: r3.Vec{Y: 0.04, Z: -0.12},
		},
		leadFore: {
			start: 0.005, trans: -0.015, peak: -0.022, speed: 1400, amp: 150, finish: 220,
			pointer: r3.Vec{X: 0.26, Y: -0.17, Z: -0.94}, xref: r3.Vec{X: 1, Y: -0.2}, roll: [3]float64{-60, 0, 60},
			waggle: 0.3, parent: leadArm, joint: r3.Vec{Z: -0.29}, sensor: r3.Vec{Y: 0.02, Z: -0.15},
		},
		leadHand: {
			start: 0, trans: -0.008, peak: -0.015, speed: 1800, amp: 185, finish: 250,
			pointer: r3.Vec{X: 0.40, Y: -0.12, Z: -0.90}, xref: r3.Vec{X: 1}, roll: [3]float64{-70, 0, 80},
			waggle: 0.6, parent: leadFore, joint: r3.Vec{Z: -0.26}, sensor: r3.Vec{Y: 0.02, Z: -0.05},
		},
		trailArm: {
			start: 0.01, trans: -0.020, peak: -0.035, speed: 900, amp: 100, finish: 170,
			pointer: r3.Vec{X: 0.22, Y: 0.22, Z: -0.92}, xref: r3.Vec{X: 1}, roll: [3]float64{20, 0, -30},
			waggle: 0.15, parent: thorax, joint: r3.Vec{Y: -0.18, Z: 0.40}, sensor: r3.Vec{Y: -0.04, Z: -0.12},
		},
		trailFore: {
			start: 0.005, trans: -0.015, peak: -0.025, speed: 1200, amp: 130, finish: 200,
			pointer: r3.Vec{X: 0.35, Y: 0.12, Z: -0.93}, xref: r3.Vec{X: 1, Y: 0.2}, roll: [3]float64{40, 0, -50},
			waggle: 0.3, parent: trailArm, joint: r3.Vec{Z: -0.29}, sensor: r3.Vec{Y: -0.02, Z: -0.15},
		},
		trailHand: {
			start: 0, trans: -0.008, peak: -0.015, speed: 1700, amp: 180, finish: 240,
			pointer: r3.Vec{X: 0.42, Z: -0.90}, xref: r3.Vec{X: 1}, roll: [3]float64{60, 0, -70},
			waggle: 0.55, parent: trailFore, joint: r3.Vec{Z: -0.26}, sensor: r3.Vec{Y: -0.02, Z: -0.05},
		},
		club: {
			start: 0, trans: 0, peak: -0.004, speed: 2200, returnAt: 0, finish: 300,
			// Lie 60° above the ground, grip 4° ahead of the head (forward
			// shaft lean), face normal toward the target.
			pointer: r3.Vec{X: 0.5, Y: -0.06, Z: -0.864}, xref: r3.Vec{Y: 1}, roll: [3]float64{-80, 0, 90},
			waggle: 1, parent: leadHand, joint: r3.Vec{Z: -0.08}, sensor: r3.Vec{Z: -0.10},
		},
	}
}

// applyFaults changes the design for the fault switches.
func applyFaults(s map[kinchainv1.Segment]*spec, cfg *Config) {
	if cfg.LateThorax {
		// The thorax turns late: it reverses at the club's top and peaks
		// after the lead arm (−30 ms) and before the lead hand (−15 ms).
		s[thorax].trans = 0
		s[thorax].peak = -0.020
	}
	if cfg.EarlyRelease {
		// Casting: the wrists release early, the club peaks 45 ms before
		// impact, ahead of the lead arm and hand, and slows into impact.
		s[club].peak = -0.045
		s[club].speed *= 0.88
	}
}
