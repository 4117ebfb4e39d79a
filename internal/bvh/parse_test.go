package bvh

import (
	"errors"
	"math"
	"strings"
	"testing"

	"gonum.org/v1/gonum/num/quat"
	"gonum.org/v1/gonum/spatial/r3"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/kinematics"
	"github.com/kinchain/kinchain/internal/rot"
)

// A two-joint file: the root's rotation channels are listed Z, Y, X and the
// child's X, Y, Z, so the order of application is visible in the results.
const twoJoints = `HIERARCHY
ROOT Base
{
	OFFSET 0 0 0
	CHANNELS 6 Xposition Yposition Zposition Zrotation Yrotation Xrotation
	JOINT Tip
	{
		OFFSET 0 1 0
		CHANNELS 3 Xrotation Yrotation Zrotation
		End Site
		{
			OFFSET 0 0 2
		}
	}
}
MOTION
Frames: 2
Frame Time: 0.01
0 0 0 0 0 0 0 0 0
1 2 3 90 0 90 90 0 90
`

func parseString(t *testing.T, s string) *File {
	t.Helper()
	f, err := Parse(strings.NewReader(s))
	if err != nil {
		t.Fatal(err)
	}
	return f
}

func near(a, b r3.Vec, tol float64) bool { return r3.Norm(r3.Sub(a, b)) <= tol }

func TestParseStructure(t *testing.T) {
	f := parseString(t, twoJoints)
	if len(f.Joints) != 2 || f.NumChannels() != 9 || len(f.Frames) != 2 || f.FrameTime != 0.01 {
		t.Fatalf("joints %d channels %d frames %d dt %g", len(f.Joints), f.NumChannels(), len(f.Frames), f.FrameTime)
	}
	tip := f.Joints[1]
	if tip.Name != "Tip" || tip.Parent != 0 || tip.Column != 6 || tip.Offset != (r3.Vec{Y: 1}) ||
		tip.EndSite == nil || *tip.EndSite != (r3.Vec{Z: 2}) || tip.Line != 6 {
		t.Fatalf("tip joint %+v", tip)
	}
	want := []Channel{Xrotation, Yrotation, Zrotation}
	for i, c := range tip.Channels {
		if c != want[i] {
			t.Fatalf("channels %v", tip.Channels)
		}
	}
	if i, ok := f.Lookup("Tip"); !ok || i != 1 {
		t.Fatalf("Lookup(Tip) = %d %v", i, ok)
	}
	if _, ok := f.Lookup("Nope"); ok {
		t.Fatalf("Lookup(Nope) found a joint")
	}
}

// Closed form (worked by hand): rotation channels apply in the listed order,
// intrinsic. Root "Z 90, Y 0, X 90" is Rz(90°)·Rx(90°): the child offset
// (0, 1, 0) goes to Rz(90)·(0, 0, 1) = (0, 0, 1), so Tip sits at
// (1, 2, 3) + (0, 0, 1). The reverse (extrinsic) reading Rx·Rz would put it
// at (1, 2, 3) + (−1, 0, 0). The Tip's own "X 90, Y 0, Z 90" is
// Rx(90°)·Rz(90°); its global rotation takes its z axis to
// Rz·Rx·Rx·Rz·ẑ = Rz·Rx·Rx·ẑ = Rz·(0, 0, −1) = (0, 0, −1).
func TestPoseChannelOrder(t *testing.T) {
	f := parseString(t, twoJoints)
	rest := f.RestPose()
	if rest.P[1] != (r3.Vec{Y: 1}) || rest.Q[1] != rot.Identity {
		t.Fatalf("rest pose %+v", rest)
	}
	p, err := f.Pose(1)
	if err != nil {
		t.Fatal(err)
	}
	if !near(p.P[0], r3.Vec{X: 1, Y: 2, Z: 3}, 1e-12) {
		t.Fatalf("root at %v", p.P[0])
	}
	if !near(p.P[1], r3.Vec{X: 1, Y: 2, Z: 4}, 1e-12) {
		t.Fatalf("tip at %v, want (1, 2, 4)", p.P[1])
	}
	if z := rot.Rotate(p.Q[1], r3.Vec{Z: 1}); !near(z, r3.Vec{Z: -1}, 1e-12) {
		t.Fatalf("tip z axis %v, want (0, 0, -1)", z)
	}
	// The root rotation equals rot.FromEuler on the listed sequence.
	if q := rot.FromEuler(rot.ZYX, math.Pi/2, 0, math.Pi/2); rot.Angle(q, p.Q[0]) > 1e-7 {
		t.Fatalf("root rotation %v, want %v", p.Q[0], q)
	}
	if _, err := f.Pose(2); err == nil {
		t.Fatalf("Pose(2) of a 2-frame file: no error")
	}
}

// Line endings: CRLF, LF, and a mix (the CMU files end a few header lines in
// LF only) parse to the same file.
func TestParseLineEndings(t *testing.T) {
	lf := parseString(t, twoJoints)
	crlf := parseString(t, strings.ReplaceAll(twoJoints, "\n", "\r\n"))
	lines := strings.Split(twoJoints, "\n")
	for i := range lines {
		if i%2 == 0 {
			lines[i] += "\r"
		}
	}
	mixed := parseString(t, strings.Join(lines, "\n"))
	for _, f := range []*File{crlf, mixed} {
		if len(f.Joints) != len(lf.Joints) || len(f.Frames) != len(lf.Frames) || f.Joints[1].Name != "Tip" {
			t.Fatalf("parsed differently: %+v", f.Joints)
		}
		for i := range f.Frames {
			for k := range f.Frames[i] {
				if f.Frames[i][k] != lf.Frames[i][k] {
					t.Fatalf("frame %d value %d: %g vs %g", i, k, f.Frames[i][k], lf.Frames[i][k])
				}
			}
		}
	}
	// Braces on the keyword's line are accepted too.
	compact := strings.NewReplacer("Base\n{", "Base {", "Tip\n\t{", "Tip {").Replace(twoJoints)
	if f := parseString(t, compact); len(f.Joints) != 2 || f.Joints[0].Name != "Base" || f.Joints[1].Name != "Tip" {
		t.Fatalf("compact braces: %+v", f.Joints)
	}
}

// Bad input: every error names the line and the element.
func TestParseErrors(t *testing.T) {
	cases := []struct {
		name, in string
		line     int
		want     string
	}{
		{"empty", "", 0, `expected "HIERARCHY"`},
		{"no root", "HIERARCHY\nMOTION\n", 2, "expected ROOT"},
		{"no name", "HIERARCHY\nROOT\n{\n", 2, "missing joint name"},
		{"bad offset", strings.Replace(twoJoints, "OFFSET 0 1 0", "OFFSET 0 x 0", 1), 8, `"x" is not a finite number`},
		{"nan offset", strings.Replace(twoJoints, "OFFSET 0 1 0", "OFFSET 0 NaN 0", 1), 8, "not a finite number"},
		{"bad channel", strings.Replace(twoJoints, "Xrotation Yrotation Zrotation", "Xrotation Wrotation Zrotation", 1), 9, `unknown channel "Wrotation"`},
		{"twice", strings.Replace(twoJoints, "Xrotation Yrotation Zrotation", "Xrotation Xrotation Zrotation", 1), 9, "listed twice"},
		{"count", strings.Replace(twoJoints, "CHANNELS 3", "CHANNELS 7", 1), 9, "not 0..6"},
		{"duplicate name", strings.Replace(twoJoints, "JOINT Tip", "JOINT Base", 1), 6, "used twice"},
		{"junk in joint", strings.Replace(twoJoints, "End Site", "Thing", 1), 10, "expected JOINT, End Site or }"},
		{"no frames", strings.Replace(twoJoints, "Frames: 2", "Frame: 2", 1), 17, `expected "Frames:"`},
		{"bad frames", strings.Replace(twoJoints, "Frames: 2", "Frames: -1", 1), 17, "not a frame count"},
		{"bad frame time", strings.Replace(twoJoints, "Frame Time: 0.01", "Frame Time: 0", 1), 18, "not a positive interval"},
		{"short frame", strings.Replace(twoJoints, "1 2 3 90 0 90 90 0 90", "1 2 3 90 0 90 90 0", 1), 20, "frame 1: 8 values, want 9"},
		{"bad value", strings.Replace(twoJoints, "1 2 3 90 0 90 90 0 90", "1 2 3 90 0 90 90 zz 90", 1), 20, `value 7 (Yrotation of Tip) "zz"`},
		{"too many frames", twoJoints + "0 0 0 0 0 0 0 0 0\n", 21, "more frames than the 2 declared on line 17"},
		{"too few frames", strings.Replace(twoJoints, "Frames: 2", "Frames: 3", 1), 20, "2 frames, but 3 declared"},
	}
	for _, c := range cases {
		_, err := Parse(strings.NewReader(c.in))
		var pe *ParseError
		if !errors.As(err, &pe) {
			t.Errorf("%s: error %v, want a *ParseError", c.name, err)
			continue
		}
		if pe.Line != c.line || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%s: %q (line %d), want line %d and %q", c.name, err, pe.Line, c.line, c.want)
		}
	}
}

// Closed form: the Y-up → z-up rotation is +90° about X: X stays, Y becomes
// z, Z becomes −y.
func TestWorldRotation(t *testing.T) {
	c := WorldRotation(r3.Vec{})
	for _, p := range [][2]r3.Vec{
		{{X: 1}, {X: 1}},
		{{Y: 1}, {Z: 1}},
		{{Z: 1}, {Y: -1}},
	} {
		if got := rot.Rotate(c, p[0]); !near(got, p[1], 1e-15) {
			t.Fatalf("C·%v = %v, want %v", p[0], got, p[1])
		}
	}
	if c := WorldRotation(r3.Vec{Z: 1}); c != rot.Identity {
		t.Fatalf("z-up file: %v", c)
	}
	if got := rot.Rotate(WorldRotation(r3.Vec{Z: -2}), r3.Vec{Z: -1}); !near(got, r3.Vec{Z: 1}, 1e-15) {
		t.Fatalf("z-down file: down maps to %v", got)
	}
}

// A T-pose skeleton in the common BVH rest pose (facing +Z, left toward +X,
// Y up) with arms along ±X. Frame 0 is the rest pose; frame 1 lowers both
// arms to the sides (LeftArm Zrotation −90°: +X → −Y; RightArm +90°) and
// turns the whole body 30° to its left about the vertical; frame 2 bends the
// left hand (LeftFingerBase Zrotation −40°) toward the palm.
const tPose = `HIERARCHY
ROOT Hips
{
	OFFSET 0 10 0
	CHANNELS 6 Xposition Yposition Zposition Zrotation Yrotation Xrotation
	JOINT Spine1
	{
		OFFSET 0 3 0
		CHANNELS 3 Zrotation Yrotation Xrotation
		JOINT Head
		{
			OFFSET 0 3 0
			CHANNELS 3 Zrotation Yrotation Xrotation
			End Site
			{
				OFFSET 0 2 0
			}
		}
		JOINT LeftArm
		{
			OFFSET 2 2 0
			CHANNELS 3 Zrotation Yrotation Xrotation
			JOINT LeftForeArm
			{
				OFFSET 3 0 0
				CHANNELS 3 Zrotation Yrotation Xrotation
				JOINT LeftHand
				{
					OFFSET 3 0 0
					CHANNELS 3 Zrotation Yrotation Xrotation
					JOINT LeftFingerBase
					{
						OFFSET 0 0 0
						CHANNELS 3 Zrotation Yrotation Xrotation
						End Site
						{
							OFFSET 1 0 0
						}
					}
				}
			}
		}
		JOINT RightArm
		{
			OFFSET -2 2 0
			CHANNELS 3 Zrotation Yrotation Xrotation
			JOINT RightForeArm
			{
				OFFSET -3 0 0
				CHANNELS 3 Zrotation Yrotation Xrotation
				JOINT RightHand
				{
					OFFSET -3 0 0
					CHANNELS 3 Zrotation Yrotation Xrotation
					JOINT RightFingerBase
					{
						OFFSET 0 0 0
						CHANNELS 3 Zrotation Yrotation Xrotation
						End Site
						{
							OFFSET -1 0 0
						}
					}
				}
			}
		}
	}
}
MOTION
Frames: 3
Frame Time: 0.0083333
0 0 0 0 0 0  0 0 0  0 0 0  0 0 0 0 0 0 0 0 0 0 0 0  0 0 0 0 0 0 0 0 0 0 0 0
0 0 0 0 30 0  0 0 0  0 0 0  -90 0 0 0 0 0 0 0 0 0 0 0  90 0 0 0 0 0 0 0 0 0 0 0
0 0 0 0 0 0  0 0 0  0 0 0  0 0 0 0 0 0 0 0 0 -40 0 0  0 0 0 0 0 0 0 0 0 0 0 0
`

func trackQ(tr *kinchainv1.Track, i int) quat.Number {
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

// The segment frames derived from the rest pose follow our conventions: in
// the T-pose the trunk faces C·(+Z) = −y with its left along C·(+X) = +x;
// the left upper arm is the neutral frame abducted 90° (its z axis, elbow →
// shoulder, toward the subject's right); lowering both arms to the sides
// gives the neutral pose, where every segment frame equals the trunk's.
func TestToCaptureSegmentFrames(t *testing.T) {
	f := parseString(t, tPose)
	c, err := ToCapture(f, Options{CaptureID: "t", PositionScale: 0.5})
	if err != nil {
		t.Fatal(err)
	}
	if len(c.Tracks) != 9 || c.CaptureId != "t" {
		t.Fatalf("%d tracks, id %q", len(c.Tracks), c.CaptureId)
	}
	pelvis := track(t, c, kinchainv1.Segment_SEGMENT_PELVIS)
	// Rest: body x (anterior) = −y world, y (left) = +x, z = +z: Rz(−90°).
	if q := trackQ(pelvis, 0); rot.Angle(q, rot.YawRotation(-math.Pi/2)) > 1e-7 {
		t.Fatalf("rest pelvis %v, want Rz(-90°)", q)
	}
	lua := track(t, c, kinchainv1.Segment_SEGMENT_LEAD_UPPER_ARM)
	q := trackQ(lua, 0)
	for _, p := range [][2]r3.Vec{
		{{Z: 1}, {X: -1}}, // elbow → shoulder: toward the subject's right = −x world
		{{X: 1}, {Y: -1}}, // anterior
		{{Y: 1}, {Z: 1}},  // abducted: the arm's left is up
	} {
		if got := rot.Rotate(q, p[0]); !near(got, p[1], 1e-9) {
			t.Fatalf("rest lead upper arm axis %v → %v, want %v", p[0], got, p[1])
		}
	}
	// Frame 1: arms down and the body turned 30° to its left: the neutral
	// pose, every segment equal to the pelvis, and the pelvis Rz(−90°+30°).
	want := rot.YawRotation((-90 + 30) * math.Pi / 180)
	for _, tr := range c.Tracks {
		if got := trackQ(tr, 1); rot.Angle(got, want) > 1e-7 {
			t.Errorf("%s in the neutral pose: %v, want %v (off %g rad)", tr.Segment, got, want, rot.Angle(got, want))
		}
	}
	// Frame 2: the left hand turned −40° about the file's Z axis, the
	// T-posed arm's anterior axis: the fingers (bone +X) tilt down, toward the
	// palm, since in a T-pose reached by abduction from the neutral pose the
	// palms face down. The hand's z axis (−bone) becomes
	// C·(−cos 40°, sin 40°, 0) = (−cos 40°, 0, sin 40°), and the ISB wrist
	// angles read 40° of flexion (Wu et al. 2005; palmar positive).
	hand := track(t, c, kinchainv1.Segment_SEGMENT_LEAD_HAND)
	s, co := math.Sincos(40 * math.Pi / 180)
	if got := rot.Rotate(trackQ(hand, 2), r3.Vec{Z: 1}); !near(got, r3.Vec{X: -co, Z: s}, 1e-9) {
		t.Fatalf("bent hand z axis %v", got)
	}
	forearm := track(t, c, kinchainv1.Segment_SEGMENT_LEAD_FOREARM)
	w := kinematics.WristAnglesOf(trackQ(forearm, 2), trackQ(hand, 2), kinematics.SideLeft)
	if math.Abs(w.Flexion-40*math.Pi/180) > 1e-9 || math.Abs(w.RadialDeviation) > 1e-9 {
		t.Fatalf("wrist angles %+v, want flexion 40°", w)
	}
	// Times are frame·FrameTime; positions C·P·scale.
	if pelvis.TimeS[2] != 2*0.0083333 || len(pelvis.Px) != 3 {
		t.Fatalf("times %v, %d positions", pelvis.TimeS, len(pelvis.Px))
	}
	head := track(t, c, kinchainv1.Segment_SEGMENT_HEAD)
	if got := (r3.Vec{X: head.Px[0], Y: head.Py[0], Z: head.Pz[0]}); !near(got, r3.Vec{Z: 8}, 1e-12) {
		t.Fatalf("head position %v, want (0, 0, 8) m", got)
	}
}

// Handedness picks the lead side; frames can be selected.
func TestToCaptureOptions(t *testing.T) {
	f := parseString(t, tPose)
	c, err := ToCapture(f, Options{Handedness: kinchainv1.Handedness_HANDEDNESS_LEFT, FirstFrame: 1, EndFrame: 2})
	if err != nil {
		t.Fatal(err)
	}
	if c.Handedness != kinchainv1.Handedness_HANDEDNESS_LEFT {
		t.Fatalf("handedness %v", c.Handedness)
	}
	lead := track(t, c, kinchainv1.Segment_SEGMENT_LEAD_UPPER_ARM)
	if len(lead.TimeS) != 1 || lead.TimeS[0] != 0.0083333 || lead.Px != nil {
		t.Fatalf("lead track times %v, positions %v", lead.TimeS, lead.Px)
	}
	// Left-handed: the lead arm is the right arm. In the rest pose the
	// right upper arm's z axis points toward the subject's left (+x world).
	c, err = ToCapture(f, Options{Handedness: kinchainv1.Handedness_HANDEDNESS_LEFT, EndFrame: 1})
	if err != nil {
		t.Fatal(err)
	}
	if got := rot.Rotate(trackQ(track(t, c, kinchainv1.Segment_SEGMENT_LEAD_UPPER_ARM), 0), r3.Vec{Z: 1}); !near(got, r3.Vec{X: 1}, 1e-9) {
		t.Fatalf("left-handed lead upper arm z %v, want +x", got)
	}
	bad := []struct {
		name string
		opt  Options
		want string
	}{
		{"first", Options{FirstFrame: 3}, "Options.FirstFrame 3"},
		{"end", Options{EndFrame: 4}, "EndFrame 4"},
		{"negative", Options{FirstFrame: -1}, "FirstFrame -1"},
		{"scale", Options{PositionScale: -1}, "Options.PositionScale"},
		{"joint", Options{Joints: map[kinchainv1.Segment]string{kinchainv1.Segment_SEGMENT_THORAX: "Chest"}}, `Options.Joints[SEGMENT_THORAX]: no joint "Chest"`},
		{"club", Options{Joints: map[kinchainv1.Segment]string{kinchainv1.Segment_SEGMENT_CLUB: "Head"}}, "no rest-frame rule for SEGMENT_CLUB"},
		{"parallel", Options{Anterior: r3.Vec{Y: 1}}, "parallel"},
	}
	for _, b := range bad {
		if _, err := ToCapture(f, b.opt); err == nil || !strings.Contains(err.Error(), b.want) {
			t.Errorf("%s: error %v, want %q", b.name, err, b.want)
		}
	}
}

// A limb joint with nothing distal to it has no bone direction.
func TestRestFrameNeedsBone(t *testing.T) {
	f := parseString(t, strings.Replace(twoJoints, "OFFSET 0 0 2", "OFFSET 0 0 0", 1))
	if _, err := f.RestFrame(kinchainv1.Segment_SEGMENT_LEAD_HAND, 1, r3.Vec{}, r3.Vec{}); err == nil || !strings.Contains(err.Error(), "no child or End Site") {
		t.Fatalf("error %v", err)
	}
}

// Parse never panics and either fails with an error or returns a file whose
// frames all have NumChannels values.
func FuzzParse(f *testing.F) {
	f.Add(twoJoints)
	f.Add(tPose)
	f.Add(strings.ReplaceAll(twoJoints, "\n", "\r\n"))
	f.Add("HIERARCHY\nROOT a {\nOFFSET 0 0 0\nCHANNELS 0\n}\nMOTION\nFrames: 1\nFrame Time: 1\n\n")
	f.Fuzz(func(t *testing.T, s string) {
		file, err := Parse(strings.NewReader(s))
		if err != nil {
			return
		}
		for i, fr := range file.Frames {
			if len(fr) != file.NumChannels() {
				t.Fatalf("frame %d has %d values, want %d", i, len(fr), file.NumChannels())
			}
			if _, err := file.Pose(i); err != nil {
				t.Fatal(err)
			}
		}
	})
}
