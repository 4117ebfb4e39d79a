package bvh

import (
	"fmt"
	"math"
	"slices"
	"strconv"

	"gonum.org/v1/gonum/num/quat"
	"gonum.org/v1/gonum/spatial/r3"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/rot"
)

// Options control ToCapture. The zero value converts every frame of a file
// with the CMU joint names, a right-handed subject and the common BVH rest
// pose (facing +Z, Y up), without positions.
type Options struct {
	// CaptureID is copied into the capture.
	CaptureID string
	// Handedness of the subject: it decides which side's joints become the
	// lead segments. Unspecified means right-handed (lead = left).
	Handedness kinchainv1.Handedness
	// Joints maps each segment to convert to a joint name; nil means
	// CMUJoints(Handedness).
	Joints map[kinchainv1.Segment]string
	// FirstFrame is the first frame converted (0-based file frame). The CMU
	// conversions hold a T-pose reference in frame 0, so pass 1 for them.
	FirstFrame int
	// EndFrame is one past the last frame converted; 0 means the end.
	EndFrame int
	// Anterior and Up are the directions, in file coordinates, the subject's
	// front and head point to in the rest pose (all channels zero). Zero
	// vectors mean +Z and +Y.
	Anterior, Up r3.Vec
	// PositionScale is metres per file length unit. When positive each track
	// carries the joint's position; 0 leaves positions out.
	PositionScale float64
}

// CMUJoints returns the joint names of the CMU BVH conversions for each
// segment: Hips, Spine1 and Head for the trunk and head; on the lead side
// (Left* for a right-handed subject, Right* for a left-handed one) LeftArm
// for the upper arm, LeftHand for the forearm and LeftFingerBase for the
// hand, and the same on the trail side.
//
// The forearm and hand are taken one joint further down the chain than the
// names suggest: in both CMU golf files the LeftHand and RightHand joints
// rotate only about their own bone axis (their Z and Y channels are 0 in
// every frame; checked by the package tests). LeftHand is the forearm's
// pronation/supination twist at the wrist, and LeftFingerBase carries the
// wrist's flexion and deviation. With LeftForeArm/LeftHand as forearm/hand
// the wrist would read 0° flexion throughout and the forearm no pronation;
// with LeftHand/LeftFingerBase the forearm frame is the distal forearm (where
// a wrist-worn sensor sits) and the hand frame the whole hand.
func CMUJoints(h kinchainv1.Handedness) map[kinchainv1.Segment]string {
	lead, trail := "Left", "Right"
	if h == kinchainv1.Handedness_HANDEDNESS_LEFT {
		lead, trail = trail, lead
	}
	return map[kinchainv1.Segment]string{
		kinchainv1.Segment_SEGMENT_PELVIS:          "Hips",
		kinchainv1.Segment_SEGMENT_THORAX:          "Spine1",
		kinchainv1.Segment_SEGMENT_HEAD:            "Head",
		kinchainv1.Segment_SEGMENT_LEAD_UPPER_ARM:  lead + "Arm",
		kinchainv1.Segment_SEGMENT_LEAD_FOREARM:    lead + "Hand",
		kinchainv1.Segment_SEGMENT_LEAD_HAND:       lead + "FingerBase",
		kinchainv1.Segment_SEGMENT_TRAIL_UPPER_ARM: trail + "Arm",
		kinchainv1.Segment_SEGMENT_TRAIL_FOREARM:   trail + "Hand",
		kinchainv1.Segment_SEGMENT_TRAIL_HAND:      trail + "FingerBase",
	}
}

// WorldRotation returns the proper rotation C from the file's world frame to
// kinchain's z-up world: the shortest rotation taking up to +z. For the
// common Y-up files it is +90° about X, (X, Y, Z) → (X, −Z, Y): the file's X
// axis is kept and its +Z becomes −y. A zero up means +Y.
func WorldRotation(up r3.Vec) quat.Number {
	if up == (r3.Vec{}) {
		up = r3.Vec{Y: 1}
	}
	up = r3.Unit(up)
	z := r3.Vec{Z: 1}
	axis := r3.Cross(up, z)
	if r3.Norm(axis) < 1e-12 {
		if up.Z > 0 {
			return rot.Identity
		}
		return rot.FromAxisAngle(r3.Vec{X: 1}, math.Pi)
	}
	return rot.FromAxisAngle(axis, math.Atan2(r3.Norm(axis), r3.Dot(up, z)))
}

// limbSegment reports whether s is an arm segment, whose frame follows its
// bone rather than the trunk.
func limbSegment(s kinchainv1.Segment) bool {
	switch s {
	case kinchainv1.Segment_SEGMENT_LEAD_UPPER_ARM, kinchainv1.Segment_SEGMENT_LEAD_FOREARM, kinchainv1.Segment_SEGMENT_LEAD_HAND,
		kinchainv1.Segment_SEGMENT_TRAIL_UPPER_ARM, kinchainv1.Segment_SEGMENT_TRAIL_FOREARM, kinchainv1.Segment_SEGMENT_TRAIL_HAND:
		return true
	}
	return false
}

// boneDirection returns the unit rest-pose direction from joint j to the
// first point distal to it: its first child (descending through children at
// the same place) or, failing that, its End Site.
func (f *File) boneDirection(rest Pose, j int) (r3.Vec, bool) {
	cur := j
	for steps := 0; steps < len(f.Joints); steps++ {
		child := -1
		for c := cur + 1; c < len(f.Joints); c++ {
			if f.Joints[c].Parent == cur {
				child = c
				break
			}
		}
		if child < 0 {
			if e := f.Joints[cur].EndSite; e != nil {
				d := r3.Sub(r3.Add(rest.P[cur], *e), rest.P[j])
				if r3.Norm(d) > 1e-9 {
					return r3.Unit(d), true
				}
			}
			return r3.Vec{}, false
		}
		if d := r3.Sub(rest.P[child], rest.P[j]); r3.Norm(d) > 1e-9 {
			return r3.Unit(d), true
		}
		cur = child
	}
	return r3.Vec{}, false
}

// RestFrame returns M, the segment frame's orientation in joint j's own
// frame, derived from the rest pose (all channels zero, where every joint
// frame equals the file's world frame):
//
//   - pelvis, thorax, head: z = up, x = anterior made perpendicular to z,
//     y = z × x (the subject's left);
//   - arm segments: z = the bone from its distal end back to the joint
//     (superior in the hanging neutral pose), x = anterior made perpendicular
//     to z, y = z × x. In a T-pose this is the neutral frame abducted 90°
//     about the anterior axis, palms down.
//
// The segment's orientation at any frame is then C ⊗ Q_j ⊗ M with C the
// WorldRotation and Q_j the joint's global orientation.
func (f *File) RestFrame(seg kinchainv1.Segment, j int, anterior, up r3.Vec) (quat.Number, error) {
	if anterior == (r3.Vec{}) {
		anterior = r3.Vec{Z: 1}
	}
	if up == (r3.Vec{}) {
		up = r3.Vec{Y: 1}
	}
	var z r3.Vec
	switch {
	case seg == kinchainv1.Segment_SEGMENT_PELVIS || seg == kinchainv1.Segment_SEGMENT_THORAX || seg == kinchainv1.Segment_SEGMENT_HEAD:
		z = r3.Unit(up)
	case limbSegment(seg):
		d, ok := f.boneDirection(f.RestPose(), j)
		if !ok {
			return quat.Number{}, fmt.Errorf("joint %q (line %d) has no child or End Site away from it to give the bone direction of %s", f.Joints[j].Name, f.Joints[j].Line, seg)
		}
		z = r3.Scale(-1, d)
	default:
		return quat.Number{}, fmt.Errorf("no rest-frame rule for %s", seg)
	}
	x := r3.Sub(anterior, r3.Scale(r3.Dot(anterior, z), z))
	if r3.Norm(x) < 1e-6*r3.Norm(anterior) {
		return quat.Number{}, fmt.Errorf("joint %q: the anterior direction %v is parallel to the segment's long axis", f.Joints[j].Name, anterior)
	}
	x = r3.Unit(x)
	y := r3.Cross(z, x)
	return rot.FromMatrix([3][3]float64{
		{x.X, y.X, z.X},
		{x.Y, y.Y, z.Y},
		{x.Z, y.Z, z.Z},
	}), nil
}

// ToCapture converts frames [FirstFrame, EndFrame) of f into a capture with
// one track per segment of opt.Joints. Sample k (file frame i) is at time
// i·FrameTime. Orientations are C ⊗ Q_j(i) ⊗ M_j (see WorldRotation and
// RestFrame), unit quaternions in kinchain's world frame (z up), signs chosen
// so that each track is hemisphere-continuous; positions,
// when PositionScale > 0, are C·P_j(i)·PositionScale in metres.
func ToCapture(f *File, opt Options) (*kinchainv1.Capture, error) {
	n := len(f.Frames)
	end := opt.EndFrame
	if end == 0 {
		end = n
	}
	if opt.FirstFrame < 0 || end > n || opt.FirstFrame >= end {
		return nil, fmt.Errorf("bvh: Options.FirstFrame %d, EndFrame %d: need 0 ≤ FirstFrame < EndFrame ≤ %d frames", opt.FirstFrame, opt.EndFrame, n)
	}
	if opt.PositionScale < 0 || math.IsNaN(opt.PositionScale) || math.IsInf(opt.PositionScale, 0) {
		return nil, fmt.Errorf("bvh: Options.PositionScale %g: need a finite value ≥ 0", opt.PositionScale)
	}
	joints := opt.Joints
	if joints == nil {
		joints = CMUJoints(opt.Handedness)
	}
	segs := make([]kinchainv1.Segment, 0, len(joints))
	for s := range joints {
		segs = append(segs, s)
	}
	slices.Sort(segs)
	c := WorldRotation(opt.Up)
	type conv struct {
		joint int
		rest  quat.Number
		track *kinchainv1.Track
		prev  quat.Number
	}
	convs := make([]conv, 0, len(segs))
	capt := &kinchainv1.Capture{
		CaptureId:  opt.CaptureID,
		Handedness: opt.Handedness,
		Metadata: map[string]string{
			"source_format": "bvh",
			"frame_time_s":  strconv.FormatFloat(f.FrameTime, 'g', -1, 64),
			"first_frame":   strconv.Itoa(opt.FirstFrame),
		},
	}
	m := end - opt.FirstFrame
	for _, s := range segs {
		name := joints[s]
		j, ok := f.Lookup(name)
		if !ok {
			return nil, fmt.Errorf("bvh: Options.Joints[%s]: no joint %q in the file", s, name)
		}
		rest, err := f.RestFrame(s, j, opt.Anterior, opt.Up)
		if err != nil {
			return nil, fmt.Errorf("bvh: Options.Joints[%s]: %w", s, err)
		}
		tr := &kinchainv1.Track{
			Segment: s,
			TimeS:   make([]float64, 0, m),
			Qw:      make([]float64, 0, m), Qx: make([]float64, 0, m), Qy: make([]float64, 0, m), Qz: make([]float64, 0, m),
		}
		if opt.PositionScale > 0 {
			tr.Px, tr.Py, tr.Pz = make([]float64, 0, m), make([]float64, 0, m), make([]float64, 0, m)
		}
		capt.Tracks = append(capt.Tracks, tr)
		convs = append(convs, conv{joint: j, rest: rest, track: tr})
	}
	for i := opt.FirstFrame; i < end; i++ {
		p := f.pose(f.Frames[i])
		t := float64(i) * f.FrameTime
		for k := range convs {
			cv := &convs[k]
			q, _ := rot.Normalize(rot.Mul(rot.Mul(c, p.Q[cv.joint]), cv.rest))
			// Keep the track hemisphere-continuous; the first sample has w ≥ 0.
			if (i == opt.FirstFrame && q.Real < 0) || (i > opt.FirstFrame && rot.Dot(q, cv.prev) < 0) {
				q = rot.Neg(q)
			}
			cv.prev = q
			tr := cv.track
			tr.TimeS = append(tr.TimeS, t)
			tr.Qw, tr.Qx, tr.Qy, tr.Qz = append(tr.Qw, q.Real), append(tr.Qx, q.Imag), append(tr.Qy, q.Jmag), append(tr.Qz, q.Kmag)
			if opt.PositionScale > 0 {
				v := r3.Scale(opt.PositionScale, rot.Rotate(c, p.P[cv.joint]))
				tr.Px, tr.Py, tr.Pz = append(tr.Px, v.X), append(tr.Py, v.Y), append(tr.Pz, v.Z)
			}
		}
	}
	return capt, nil
}
