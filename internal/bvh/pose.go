package bvh

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/num/quat"
	"gonum.org/v1/gonum/spatial/r3"

	"github.com/kinchain/kinchain/internal/rot"
)

// Pose is every joint's global orientation and position at one frame, in
// the file's world frame, indexed like File.Joints.
type Pose struct {
	// Q[j] rotates vectors from joint j's frame into the file's world frame.
	Q []quat.Number
	// P[j] is joint j's position, file units.
	P []r3.Vec
}

// Local returns joint j's rotation and translation relative to its parent
// for the channel values of one frame (nil: the rest pose, all channels
// zero). The rotation is the product of the joint's rotation channels in the
// order listed, each an elementary right-hand rotation by the value in
// degrees (intrinsic: "Zrotation Yrotation Xrotation" gives Rz·Ry·Rx); the
// translation is the joint's OFFSET plus its position channels.
func (f *File) Local(values []float64, j int) (quat.Number, r3.Vec) {
	jt := &f.Joints[j]
	q := rot.Identity
	t := jt.Offset
	if values == nil {
		return q, t
	}
	for k, c := range jt.Channels {
		v := values[jt.Column+k]
		switch c {
		case Xposition:
			t.X += v
		case Yposition:
			t.Y += v
		case Zposition:
			t.Z += v
		case Xrotation:
			q = rot.Mul(q, rot.FromAxisAngle(r3.Vec{X: 1}, v*math.Pi/180))
		case Yrotation:
			q = rot.Mul(q, rot.FromAxisAngle(r3.Vec{Y: 1}, v*math.Pi/180))
		case Zrotation:
			q = rot.Mul(q, rot.FromAxisAngle(r3.Vec{Z: 1}, v*math.Pi/180))
		}
	}
	return q, t
}

// pose chains the local transforms from the roots: Q[j] = Q[parent]·L[j],
// P[j] = P[parent] + Q[parent]·t[j].
func (f *File) pose(values []float64) Pose {
	p := Pose{Q: make([]quat.Number, len(f.Joints)), P: make([]r3.Vec, len(f.Joints))}
	for j := range f.Joints {
		q, t := f.Local(values, j)
		if par := f.Joints[j].Parent; par >= 0 {
			p.Q[j] = rot.Mul(p.Q[par], q)
			p.P[j] = r3.Add(p.P[par], rot.Rotate(p.Q[par], t))
		} else {
			p.Q[j] = q
			p.P[j] = t
		}
	}
	return p
}

// Pose returns the global pose at frame i (0-based, as stored in the file).
func (f *File) Pose(i int) (Pose, error) {
	if i < 0 || i >= len(f.Frames) {
		return Pose{}, fmt.Errorf("bvh: frame %d out of range [0, %d)", i, len(f.Frames))
	}
	return f.pose(f.Frames[i]), nil
}

// RestPose returns the pose with every channel zero: identity orientations,
// positions the summed offsets.
func (f *File) RestPose() Pose {
	return f.pose(nil)
}
