package bvh_test

import (
	"math"
	"testing"

	"gonum.org/v1/gonum/num/quat"
	"gonum.org/v1/gonum/spatial/r3"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/bvh"
	"github.com/kinchain/kinchain/internal/bvh/bvhtest"
	"github.com/kinchain/kinchain/internal/rot"
)

// frames per trial as the dataset's README lists them (the "Frames:" header,
// which counts the T-pose frame 0).
var readmeFrames = map[string]int{"64_08": 365, "64_09": 453}

func angleBetween(a, b r3.Vec) float64 {
	return math.Acos(math.Max(-1, math.Min(1, r3.Dot(r3.Unit(a), r3.Unit(b)))))
}

func joint(t *testing.T, f *bvh.File, name string) int {
	t.Helper()
	j, ok := f.Lookup(name)
	if !ok {
		t.Fatalf("no joint %q", name)
	}
	return j
}

// The file facts of /work/shared/data/cmu-golf/README.md: frame counts,
// 120 Hz, root with 6 channels (positions, then Z/Y/X rotation), every other
// joint 3 channels Zrotation Yrotation Xrotation, CRLF line endings with a
// few LF-only lines (both parse).
func TestCMUFileFacts(t *testing.T) {
	for _, trial := range bvhtest.Trials {
		f := bvhtest.File(t, trial)
		if len(f.Frames) != readmeFrames[trial] {
			t.Errorf("%s: %d frames, README %d", trial, len(f.Frames), readmeFrames[trial])
		}
		if rate := 1 / f.FrameTime; math.Abs(rate-120) > 0.01 {
			t.Errorf("%s: %g Hz, README 120 Hz", trial, rate)
		}
		root := f.Joints[0]
		want := []bvh.Channel{bvh.Xposition, bvh.Yposition, bvh.Zposition, bvh.Zrotation, bvh.Yrotation, bvh.Xrotation}
		if root.Name != "Hips" || root.Parent != -1 || len(root.Channels) != 6 {
			t.Fatalf("%s: root %+v", trial, root)
		}
		for i := range want {
			if root.Channels[i] != want[i] {
				t.Fatalf("%s: root channels %v", trial, root.Channels)
			}
		}
		for _, j := range f.Joints[1:] {
			if len(j.Channels) != 3 || j.Channels[0] != bvh.Zrotation || j.Channels[1] != bvh.Yrotation || j.Channels[2] != bvh.Xrotation {
				t.Fatalf("%s: joint %s channels %v", trial, j.Name, j.Channels)
			}
		}
		if f.NumChannels() != 6+3*(len(f.Joints)-1) {
			t.Errorf("%s: %d channels for %d joints", trial, f.NumChannels(), len(f.Joints))
		}
		for _, name := range []string{"Hips", "Spine1", "Head", "LeftArm", "LeftForeArm", "LeftHand", "RightArm", "RightForeArm", "RightHand"} {
			joint(t, f, name)
		}
	}
}

// README: frame 0 is the skeleton's T-pose reference. Checked geometrically
// after the file's own forward kinematics: both upper arms within 15° of
// horizontal and pointing to their side, thighs within 10° of vertical.
func TestCMUFrameZeroIsTPose(t *testing.T) {
	for _, trial := range bvhtest.Trials {
		f := bvhtest.File(t, trial)
		p, err := f.Pose(0)
		if err != nil {
			t.Fatal(err)
		}
		up := r3.Vec{Y: 1}
		// Left of the T-posed subject: the rest pose faces +Z with the left
		// toward +X (README), and the root is not rotated in frame 0.
		left := r3.Vec{X: 1}
		for _, arm := range [][3]string{{"LeftArm", "LeftForeArm", "+"}, {"RightArm", "RightForeArm", "-"}} {
			d := r3.Sub(p.P[joint(t, f, arm[1])], p.P[joint(t, f, arm[0])])
			if a := angleBetween(d, up); math.Abs(a-math.Pi/2) > 15*math.Pi/180 {
				t.Errorf("%s frame 0: %s %.1f° from vertical", trial, arm[0], a*180/math.Pi)
			}
			side := left
			if arm[2] == "-" {
				side = r3.Scale(-1, left)
			}
			if r3.Dot(r3.Unit(d), side) < 0.9 {
				t.Errorf("%s frame 0: %s points along %v", trial, arm[0], r3.Unit(d))
			}
		}
		for _, leg := range [][2]string{{"LeftUpLeg", "LeftLeg"}, {"RightUpLeg", "RightLeg"}} {
			d := r3.Sub(p.P[joint(t, f, leg[1])], p.P[joint(t, f, leg[0])])
			if a := angleBetween(d, r3.Scale(-1, up)); a > 10*math.Pi/180 {
				t.Errorf("%s frame 0: %s %.1f° from vertical", trial, leg[0], a*180/math.Pi)
			}
		}
	}
}

// Forward kinematics against a fact of the trade (common practice, no
// source): the feet stay planted through a swing while the hands travel far.
// Over the motion frames each toe joint stays within 12 % of the hip height
// of its address position (horizontally), while the lead hand moves more than
// 30 % of it. A wrong rotation order or composition scatters the feet.
func TestCMUFeetPlanted(t *testing.T) {
	for _, trial := range bvhtest.Trials {
		f := bvhtest.File(t, trial)
		addr, _ := f.Pose(1)
		hip := addr.P[0].Y
		maxMove := func(name string) float64 {
			j := joint(t, f, name)
			m := 0.0
			for i := 1; i < len(f.Frames); i++ {
				p, _ := f.Pose(i)
				m = math.Max(m, math.Hypot(p.P[j].X-addr.P[j].X, p.P[j].Z-addr.P[j].Z))
			}
			return m
		}
		for _, toe := range []string{"LeftToeBase", "RightToeBase"} {
			if m := maxMove(toe); m > 0.12*hip {
				t.Errorf("%s: %s moved %.2f, hip height %.2f", trial, toe, m, hip)
			}
		}
		if m := maxMove("LeftHand"); m < 0.3*hip {
			t.Errorf("%s: lead hand moved only %.2f, hip height %.2f", trial, m, hip)
		}
	}
}

// The reason bvh.CMUJoints takes LeftHand as the forearm: in both files the
// LeftHand and RightHand joints rotate only about their bone axis (the
// file's X axis in the rest pose, where the arm bones lie along ±X), a twist
// of the distal forearm, while LeftFingerBase carries the wrist's bending.
func TestCMUHandJointIsForearmTwist(t *testing.T) {
	for _, trial := range bvhtest.Trials {
		f := bvhtest.File(t, trial)
		rest := f.RestPose()
		for _, side := range []string{"Left", "Right"} {
			j := joint(t, f, side+"Hand")
			fb := joint(t, f, side+"FingerBase")
			next := joint(t, f, side+"HandIndex1")
			if bone := r3.Unit(r3.Sub(rest.P[next], rest.P[j])); math.Abs(bone.X) < 0.999 {
				t.Fatalf("%s: %sHand bone %v is not along X", trial, side, bone)
			}
			col := f.Joints[j].Column
			lo, hi := math.Inf(1), math.Inf(-1)
			bend := 0.0
			for i, fr := range f.Frames[1:] {
				if fr[col] != 0 || fr[col+1] != 0 {
					t.Fatalf("%s frame %d: %sHand Z/Y rotation %g %g", trial, i+1, side, fr[col], fr[col+1])
				}
				lo, hi = math.Min(lo, fr[col+2]), math.Max(hi, fr[col+2])
				c := f.Joints[fb].Column
				bend = math.Max(bend, math.Abs(fr[c])+math.Abs(fr[c+1]))
			}
			if hi-lo < 30 || bend < 30 {
				t.Errorf("%s: %sHand twist range %.1f°, %sFingerBase bending up to %.1f°", trial, side, hi-lo, side, bend)
			}
		}
	}
}

func q(tr *kinchainv1.Track, i int) quat.Number {
	return quat.Number{Real: tr.Qw[i], Imag: tr.Qx[i], Jmag: tr.Qy[i], Kmag: tr.Qz[i]}
}

func track(t *testing.T, c *kinchainv1.Capture, s kinchainv1.Segment) *kinchainv1.Track {
	t.Helper()
	for _, tr := range c.Tracks {
		if tr.Segment == s {
			return tr
		}
	}
	t.Fatalf("no %s track", s)
	return nil
}

// The converted capture: sample counts and times, unit and
// hemisphere-continuous quaternions, the README's facts (pelvis upright and
// the golfer facing roughly +X at address, right-handed: lead foot toward
// the target), and segment axes that agree with the file's own joint
// positions in every frame.
func TestCMUCapture(t *testing.T) {
	for _, trial := range bvhtest.Trials {
		f := bvhtest.File(t, trial)
		c := bvhtest.Capture(t, trial)
		if len(c.Tracks) != 9 || c.CaptureId != "cmu-"+trial || c.Handedness != kinchainv1.Handedness_HANDEDNESS_RIGHT {
			t.Fatalf("%s: %d tracks, id %q, %v", trial, len(c.Tracks), c.CaptureId, c.Handedness)
		}
		n := readmeFrames[trial] - 1
		for _, tr := range c.Tracks {
			if len(tr.TimeS) != n || len(tr.Qw) != n {
				t.Fatalf("%s %s: %d samples, want %d", trial, tr.Segment, len(tr.TimeS), n)
			}
			for i := 0; i < n; i++ {
				if tr.TimeS[i] != float64(i+1)*f.FrameTime {
					t.Fatalf("%s %s: time[%d] = %g", trial, tr.Segment, i, tr.TimeS[i])
				}
				if d := math.Abs(rot.Norm(q(tr, i)) - 1); d > 1e-12 {
					t.Fatalf("%s %s: |q[%d]| − 1 = %g", trial, tr.Segment, i, d)
				}
				if i > 0 && rot.Dot(q(tr, i), q(tr, i-1)) < 0 {
					t.Fatalf("%s %s: hemisphere flip at %d", trial, tr.Segment, i)
				}
			}
		}
		pelvis := track(t, c, kinchainv1.Segment_SEGMENT_PELVIS)
		qp := q(pelvis, 0)
		if a := angleBetween(rot.Rotate(qp, r3.Vec{Z: 1}), r3.Vec{Z: 1}); a > 30*math.Pi/180 {
			t.Errorf("%s: pelvis z axis %.1f° from vertical at address", trial, a*180/math.Pi)
		}
		if h := rot.Heading(qp); math.Abs(h) > 30*math.Pi/180 {
			t.Errorf("%s: pelvis faces %.1f° from +x at address (README: roughly +X)", trial, h*180/math.Pi)
		}
		// Right-handed: the lead (left) foot is nearer the target, on the
		// golfer's left: toward the pelvis +y axis and world +y.
		cw := bvh.WorldRotation(r3.Vec{})
		addr, _ := f.Pose(1)
		stance := rot.Rotate(cw, r3.Sub(addr.P[joint(t, f, "LeftToeBase")], addr.P[joint(t, f, "RightToeBase")]))
		if r3.Dot(r3.Unit(stance), rot.Rotate(qp, r3.Vec{Y: 1})) < 0.8 || stance.Y <= 0 {
			t.Errorf("%s: lead foot at %v from the trail foot, pelvis y %v", trial, stance, rot.Rotate(qp, r3.Vec{Y: 1}))
		}
		thorax := track(t, c, kinchainv1.Segment_SEGMENT_THORAX)
		lua := track(t, c, kinchainv1.Segment_SEGMENT_LEAD_UPPER_ARM)
		tua := track(t, c, kinchainv1.Segment_SEGMENT_TRAIL_UPPER_ARM)
		for i := 0; i < n; i++ {
			p, _ := f.Pose(i + 1)
			pos := func(name string) r3.Vec { return rot.Rotate(cw, p.P[joint(t, f, name)]) }
			// Thorax y along the shoulder line (trail → lead shoulder).
			if a := angleBetween(r3.Sub(pos("LeftArm"), pos("RightArm")), rot.Rotate(q(thorax, i), r3.Vec{Y: 1})); a > 5*math.Pi/180 {
				t.Fatalf("%s sample %d: shoulder line %.1f° from thorax y", trial, i, a*180/math.Pi)
			}
			// Upper-arm z from the elbow to the shoulder.
			if a := angleBetween(r3.Sub(pos("LeftArm"), pos("LeftForeArm")), rot.Rotate(q(lua, i), r3.Vec{Z: 1})); a > 1e-6 {
				t.Fatalf("%s sample %d: lead upper arm z off the bone by %g rad", trial, i, a)
			}
			if a := angleBetween(r3.Sub(pos("RightArm"), pos("RightForeArm")), rot.Rotate(q(tua, i), r3.Vec{Z: 1})); a > 1e-6 {
				t.Fatalf("%s sample %d: trail upper arm z off the bone by %g rad", trial, i, a)
			}
		}
	}
}
