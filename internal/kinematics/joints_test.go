package kinematics

import (
	"encoding/json"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"testing"

	"gonum.org/v1/gonum/num/quat"
	"gonum.org/v1/gonum/spatial/r3"

	"github.com/kinchain/kinchain/internal/rot"
)

const deg = math.Pi / 180

// angDiff returns |a − b| modulo 2π, in [0, π].
func angDiff(a, b float64) float64 {
	return math.Abs(wrapPi(a - b))
}

// frame returns the orientation whose axes, written in the parent frame, are
// x, y and z. It fails the test unless they form a right-handed orthonormal
// triad, so that every constructed pose is what its comment says.
func frame(t *testing.T, x, y, z r3.Vec) quat.Number {
	t.Helper()
	for _, v := range []r3.Vec{x, y, z} {
		if math.Abs(r3.Norm(v)-1) > 1e-12 {
			t.Fatalf("axis %v is not unit", v)
		}
	}
	if math.Abs(r3.Dot(x, y)) > 1e-12 || math.Abs(r3.Dot(y, z)) > 1e-12 || math.Abs(r3.Dot(x, z)) > 1e-12 {
		t.Fatalf("axes %v %v %v are not orthogonal", x, y, z)
	}
	if r3.Norm(r3.Sub(r3.Cross(x, y), z)) > 1e-12 {
		t.Fatalf("axes %v %v %v are not right-handed", x, y, z)
	}
	return rot.FromMatrix([3][3]float64{
		{x.X, y.X, z.X},
		{x.Y, y.Y, z.Y},
		{x.Z, y.Z, z.Z},
	})
}

var (
	ex = r3.Vec{X: 1}
	ey = r3.Vec{Y: 1}
	ez = r3.Vec{Z: 1}
)

func neg(v r3.Vec) r3.Vec { return r3.Scale(-1, v) }

func vec(x, y, z float64) r3.Vec { return r3.Vec{X: x, Y: y, Z: z} }

func sc(a float64) (float64, float64) { return math.Sin(a * deg), math.Cos(a * deg) }

// qdist returns min(|a − b|, |a + b|), a distance between the rotations of
// two unit quaternions that keeps full precision for small differences.
func qdist(a, b quat.Number) float64 {
	return math.Min(quat.Abs(quat.Sub(a, b)), quat.Abs(quat.Add(a, b)))
}

func readGolden(t *testing.T, name string, v any) {
	t.Helper()
	b, err := os.ReadFile(filepath.Join("..", "..", "testdata", "golden", "scipy", name))
	if err != nil {
		t.Fatalf("golden file (written by testdata/golden/scipy/gen_euler.py): %v", err)
	}
	if err := json.Unmarshal(b, v); err != nil {
		t.Fatalf("%s: %v", name, err)
	}
}

func wxyz(q [4]float64) quat.Number {
	return quat.Number{Real: q[0], Imag: q[1], Jmag: q[2], Kmag: q[3]}
}

func parseSeq(t *testing.T, s string) rot.Sequence {
	t.Helper()
	var seq rot.Sequence
	for i, c := range s {
		switch c {
		case 'X':
			seq[i] = rot.X
		case 'Y':
			seq[i] = rot.Y
		case 'Z':
			seq[i] = rot.Z
		default:
			t.Fatalf("bad sequence %q", s)
		}
	}
	return seq
}

// Reference: scipy.spatial.transform.Rotation.as_euler (scipy 1.10, Debian
// python3-scipy), intrinsic sequences, golden file euler.json. Tolerances:
// 1e-9 rad away from gimbal lock (the two algorithms differ: scipy 1.10 works
// on the matrix, rot.Euler on the quaternion); 1e-6 rad for middle angles
// 1e-5 rad from the singular value, where the first and third angles are
// amplified by 1/δ; at lock both set the third angle to 0 and the first must
// agree to 1e-6 rad.
func TestEulerAgainstScipy(t *testing.T) {
	var g struct {
		Cases []struct {
			Seq    string
			Kind   string
			Q      [4]float64
			Angles [3]float64
			Locked bool
		}
	}
	readGolden(t, "euler.json", &g)
	if len(g.Cases) < 400 {
		t.Fatalf("only %d cases in euler.json", len(g.Cases))
	}
	kinds := map[string]int{}
	for i, c := range g.Cases {
		kinds[c.Kind]++
		a, b, cc, locked := rot.Euler(parseSeq(t, c.Seq), wxyz(c.Q))
		tol := 1e-9
		if c.Kind == "near_lock" || c.Kind == "lock" {
			tol = 1e-6
		}
		if locked != c.Locked {
			t.Errorf("case %d (%s %s): locked %v, scipy %v", i, c.Seq, c.Kind, locked, c.Locked)
			continue
		}
		got := [3]float64{a, b, cc}
		for k := range got {
			if angDiff(got[k], c.Angles[k]) > tol {
				t.Errorf("case %d (%s %s): angle %d = %.12g, scipy %.12g", i, c.Seq, c.Kind, k, got[k], c.Angles[k])
			}
		}
	}
	for _, k := range []string{"random", "elementary", "near_lock", "lock"} {
		if kinds[k] == 0 {
			t.Errorf("no %s cases in euler.json", k)
		}
	}
}

// Reference: the joint angles of golden file joints.json, computed with scipy
// by changing basis into the ISB axes (Wu et al. 2002, 2005) and calling
// as_euler on the ISB sequence — a formulation independent of ours, which
// renames the sequence's axes instead. Tolerance 1e-9 rad (1e-7 rad for
// elevations within 1° of gimbal lock); where either side declares gimbal
// lock, only the elevation and the defined combination of plane and axial
// rotation are compared.
func TestJointAnglesAgainstScipy(t *testing.T) {
	var g struct {
		Cases []struct {
			Kind   string
			Left   bool
			P, D   [4]float64
			Angles [3]float64
			Locked bool
		}
	}
	readGolden(t, "joints.json", &g)
	kinds := map[string]int{}
	for i, c := range g.Cases {
		kinds[c.Kind]++
		p, d := wxyz(c.P), wxyz(c.D)
		side := SideRight
		if c.Left {
			side = SideLeft
		}
		var got []float64
		tol := 1e-9
		switch c.Kind {
		case "body":
			a := BodyAnglesOf(p, d)
			got = []float64{a.AxialRotation, a.Flexion, a.LateralBend}
		case "trunk_isb":
			a := BodyAnglesISB(p, d)
			got = []float64{a.Flexion, a.LateralBend, a.AxialRotation}
		case "humerothoracic":
			a := HumerothoracicAngles(p, d, side)
			got = []float64{a.PlaneOfElevation, a.Elevation, a.AxialRotation}
			e := c.Angles[1]
			if e < 1*deg || e > math.Pi-1*deg {
				tol = 1e-7
				if !a.NearGimbalLock {
					t.Errorf("case %d: elevation %g rad not flagged near gimbal lock", i, e)
				}
			}
			_, _, _, locked := rot.Euler(seqZXZ, onSide(p, d, side))
			if locked || c.Locked {
				if math.Abs(got[1]-e) > 1e-6 {
					t.Errorf("case %d (locked): elevation %g, scipy %g", i, got[1], e)
				}
				comb := func(v []float64) float64 {
					if e < math.Pi/2 {
						return v[0] + v[2]
					}
					return v[0] - v[2]
				}
				if angDiff(comb(got), comb(c.Angles[:])) > 1e-6 {
					t.Errorf("case %d (locked): plane/axial combination %g, scipy %g", i, comb(got), comb(c.Angles[:]))
				}
				continue
			}
		case "wrist":
			a := WristAnglesOf(p, d, side)
			got = []float64{a.Flexion, a.RadialDeviation, a.Rotation}
		case "elbow":
			a := ElbowAnglesOf(p, d, side)
			got = []float64{a.Flexion, a.CarryingAngle, a.Pronation}
		case "club":
			a := ClubAnglesOf(d)
			got = []float64{a.ShaftLean, a.ShaftPlane}
		default:
			t.Fatalf("case %d: unknown kind %q", i, c.Kind)
		}
		for k := range got {
			if angDiff(got[k], c.Angles[k]) > tol {
				t.Errorf("case %d (%s left=%v): angle %d = %.12g, scipy %.12g", i, c.Kind, c.Left, k, got[k], c.Angles[k])
			}
		}
	}
	for _, k := range []string{"body", "trunk_isb", "humerothoracic", "wrist", "elbow", "club"} {
		if kinds[k] < 60 {
			t.Errorf("only %d %s cases in joints.json", kinds[k], k)
		}
	}
}

type bodyCase struct {
	name                    string
	x, y, z                 r3.Vec
	flexion, lateral, axial float64 // deg
}

// Closed form, ISB trunk definitions (Wu et al. 2002) with the product's
// signs: a single-plane motion reads as that angle alone in both sequences.
// Each pose is built from its axes, not from the angle formulas.
func TestBodyAnglesSinglePlane(t *testing.T) {
	s30, c30 := sc(30)
	s20, c20 := sc(20)
	s45, c45 := sc(45)
	cases := []bodyCase{
		{"neutral", ex, ey, ez, 0, 0, 0},
		// Forward bend: z tilts toward +x about y.
		{"flexion 30", vec(c30, 0, -s30), ey, vec(s30, 0, c30), 30, 0, 0},
		// Extension: z tilts toward −x.
		{"extension 30", vec(c30, 0, s30), ey, vec(-s30, 0, c30), -30, 0, 0},
		// Lateral bend toward the right (trail side for a right-hander): z tilts toward −y.
		{"lateral bend 20 right", ex, vec(0, c20, s20), vec(0, -s20, c20), 0, 20, 0},
		// Axial rotation toward the left (+y, the target): x turns toward +y.
		{"axial 45 left", vec(c45, s45, 0), vec(-s45, c45, 0), ez, 0, 0, 45},
		{"axial 45 right", vec(c45, -s45, 0), vec(s45, c45, 0), ez, 0, 0, -45},
	}
	for _, c := range cases {
		q := frame(t, c.x, c.y, c.z)
		for name, a := range map[string]BodyAngles{"Z-Y′-X″": BodyAnglesOf(rot.Identity, q), "ISB": BodyAnglesISB(rot.Identity, q)} {
			if math.Abs(a.Flexion-c.flexion*deg) > 1e-12 || math.Abs(a.LateralBend-c.lateral*deg) > 1e-12 || math.Abs(a.AxialRotation-c.axial*deg) > 1e-12 {
				t.Errorf("%s (%s): flexion %.6f lateral %.6f axial %.6f deg, want %g %g %g", c.name, name,
					a.Flexion/deg, a.LateralBend/deg, a.AxialRotation/deg, c.flexion, c.lateral, c.axial)
			}
			if a.NearGimbalLock {
				t.Errorf("%s (%s): flagged near gimbal lock", c.name, name)
			}
		}
	}
}

// Closed form: the two sequences differ once rotations combine, each
// reproducing its own definition. A turn of 40° followed by a forward bend of
// 30° about the turned mediolateral axis is exactly axial 40, flexion 30 in
// Z-Y′-X″; ISB (flexion first) reads it differently, yet its angles
// rebuild the same rotation.
func TestBodyAnglesSequencesDiffer(t *testing.T) {
	q := rot.Mul(rot.FromAxisAngle(ez, 40*deg), rot.FromAxisAngle(ey, 30*deg))
	a := BodyAnglesOf(rot.Identity, q)
	if math.Abs(a.AxialRotation-40*deg) > 1e-12 || math.Abs(a.Flexion-30*deg) > 1e-12 || math.Abs(a.LateralBend) > 1e-12 {
		t.Fatalf("Z-Y′-X″: %+v", a)
	}
	b := BodyAnglesISB(rot.Identity, q)
	if math.Abs(b.Flexion-30*deg) < 1*deg && math.Abs(b.AxialRotation-40*deg) < 1*deg {
		t.Fatalf("ISB sequence read the combined rotation like Z-Y′-X″: %+v", b)
	}
	if back := rot.FromEuler(seqYXZ, b.Flexion, b.LateralBend, b.AxialRotation); qdist(back, q) > 1e-12 {
		t.Fatalf("ISB angles %+v do not rebuild the rotation (off %g)", b, qdist(back, q))
	}
}

// The reference frame: separation of a thorax relative to a turned and tilted
// pelvis equals the angles of the rotation between them.
func TestBodyAnglesRelativeToReference(t *testing.T) {
	r := rand.New(rand.NewPCG(11, 12))
	for i := 0; i < 50; i++ {
		pelvis := rot.FromRotVec(vec(r.NormFloat64(), r.NormFloat64(), r.NormFloat64()))
		ax, fl, lb := (r.Float64()-0.5)*2, (r.Float64()-0.5)*2, (r.Float64()-0.5)*2
		thorax := rot.Mul(pelvis, rot.FromEuler(rot.ZYX, ax, fl, lb))
		a := BodyAnglesOf(pelvis, thorax)
		if math.Abs(a.AxialRotation-ax) > 1e-9 || math.Abs(a.Flexion-fl) > 1e-9 || math.Abs(a.LateralBend-lb) > 1e-9 {
			t.Fatalf("separation %+v, want %g %g %g", a, ax, fl, lb)
		}
	}
}

// Gimbal lock of Z-Y′-X″ at flexion 90°: flagged, lateral bend set to 0,
// and the angles still rebuild the rotation.
func TestBodyAnglesGimbalLock(t *testing.T) {
	q := rot.FromEuler(rot.ZYX, 0.4, math.Pi/2, 0.3)
	a := BodyAnglesOf(rot.Identity, q)
	if !a.NearGimbalLock || a.LateralBend != 0 {
		t.Fatalf("at flexion 90°: %+v", a)
	}
	if back := rot.FromEuler(rot.ZYX, a.AxialRotation, a.Flexion, a.LateralBend); rot.Angle(back, q) > 1e-6 {
		t.Fatalf("locked angles do not rebuild the rotation: off %g rad", rot.Angle(back, q))
	}
	if a := BodyAnglesOf(rot.Identity, rot.FromEuler(rot.ZYX, 0, 81*deg, 0)); !a.NearGimbalLock {
		t.Fatalf("flexion 81° not flagged")
	}
	if a := BodyAnglesOf(rot.Identity, rot.FromEuler(rot.ZYX, 0, 79*deg, 0)); a.NearGimbalLock {
		t.Fatalf("flexion 79° flagged")
	}
}

type armCase struct {
	name                   string
	side                   Side
	x, y, z                r3.Vec // humerus axes in the thorax frame
	plane, elevation, axis float64
	lock                   bool
}

// Closed form, ISB humerothoracic definitions (Wu et al. 2005): plane of
// elevation 0° = abduction, 90° = forward flexion; elevation from the
// thorax's long axis; axial rotation positive internal. The humerus z axis
// points from the elbow to the shoulder, so the distal direction is −z.
func TestHumerothoracicClosedForm(t *testing.T) {
	s30, c30 := sc(30)
	s45, c45 := sc(45)
	s20, c20 := sc(20)
	cases := []armCase{
		{"left neutral", SideLeft, ex, ey, ez, 0, 0, 0, true},
		// Left arm abducted 90° in the frontal plane: distal toward +y (left).
		{"left abduction 90", SideLeft, ex, ez, neg(ey), 0, 90, 0, false},
		{"right abduction 90", SideRight, ex, neg(ez), ey, 0, 90, 0, false},
		// Forward flexion 90° about the mediolateral axis: distal toward +x.
		// Y-X′-Y″ reads this single rotation about a fixed horizontal axis
		// as plane 90°, elevation 90° and axial rotation −90° (Codman's
		// paradox). Closed form on our axes: Ry(−90°) = Rz(90°)·Rx(−90°)·
		// Rz(−90°), checked by TestCodmanIdentity.
		{"left flexion 90", SideLeft, ez, ey, neg(ex), 90, 90, -90, false},
		{"right flexion 90", SideRight, ez, ey, neg(ex), 90, 90, -90, false},
		// Abducted 90° and internally rotated 30°: the arm's anterior axis
		// (the direction of a forearm flexed 90°) turns down.
		{"left abduction 90 internal 30", SideLeft, vec(c30, 0, -s30), r3.Cross(neg(ey), vec(c30, 0, -s30)), neg(ey), 0, 90, 30, false},
		{"right abduction 90 internal 30", SideRight, vec(c30, 0, -s30), r3.Cross(ey, vec(c30, 0, -s30)), ey, 0, 90, 30, false},
		// Hanging arm (elevation 0) internally rotated 20°: the anterior axis
		// turns toward the midline (−y for the left arm, +y for the right).
		{"left neutral internal 20", SideLeft, vec(c20, -s20, 0), vec(s20, c20, 0), ez, 0, 0, 20, true},
		{"right neutral internal 20", SideRight, vec(c20, s20, 0), vec(-s20, c20, 0), ez, 0, 0, 20, true},
		// Arm straight up (elevation 180°) through abduction.
		{"left elevation 180", SideLeft, ex, neg(ey), neg(ez), 0, 180, 0, true},
		// Elevation 45° in the abduction plane.
		{"left abduction 45", SideLeft, ex, vec(0, c45, s45), vec(0, -s45, c45), 0, 45, 0, false},
	}
	for _, c := range cases {
		a := HumerothoracicAngles(rot.Identity, frame(t, c.x, c.y, c.z), c.side)
		if angDiff(a.PlaneOfElevation, c.plane*deg) > 1e-9 || math.Abs(a.Elevation-c.elevation*deg) > 1e-7 ||
			angDiff(a.AxialRotation, c.axis*deg) > 1e-9 || a.NearGimbalLock != c.lock {
			t.Errorf("%s: plane %.6f elevation %.6f axial %.6f deg lock %v, want %g %g %g %v", c.name,
				a.PlaneOfElevation/deg, a.Elevation/deg, a.AxialRotation/deg, a.NearGimbalLock,
				c.plane, c.elevation, c.axis, c.lock)
		}
	}
}

// Geometry of the definitions (Wu et al. 2005): the elevation is the angle
// between the humerus' and the thorax's long axes, and the plane of
// elevation is the azimuth of the distal humerus direction d measured from
// the lateral axis toward anterior: atan2(d·x, d·lateral), lateral = +y for
// the left arm and −y for the right. Checked for random orientations of both
// segments, independent of the Euler decomposition.
func TestHumerothoracicGeometry(t *testing.T) {
	r := rand.New(rand.NewPCG(21, 22))
	for i := 0; i < 500; i++ {
		thorax := rot.FromRotVec(vec(r.NormFloat64(), r.NormFloat64(), r.NormFloat64()))
		humerus := rot.FromRotVec(vec(r.NormFloat64()*2, r.NormFloat64()*2, r.NormFloat64()*2))
		d := rot.InvRotate(thorax, rot.Rotate(humerus, neg(ez)))
		for _, side := range []Side{SideLeft, SideRight} {
			a := HumerothoracicAngles(thorax, humerus, side)
			if a.NearGimbalLock {
				continue
			}
			lateral := d.Y
			if side == SideRight {
				lateral = -d.Y
			}
			if want := math.Acos(-d.Z); math.Abs(a.Elevation-want) > 1e-9 {
				t.Fatalf("elevation %g, geometric %g", a.Elevation, want)
			}
			if want := math.Atan2(d.X, lateral); angDiff(a.PlaneOfElevation, want) > 1e-8 {
				t.Fatalf("side %v: plane %g, geometric %g", side, a.PlaneOfElevation, want)
			}
			// The angles rebuild the relative rotation (right-side form).
			q := onSide(thorax, humerus, side)
			back := rot.FromEuler(seqZXZ, a.PlaneOfElevation, -a.Elevation, a.AxialRotation)
			if qdist(back, q) > 1e-12 {
				t.Fatalf("angles %+v do not rebuild the rotation: off %g", a, qdist(back, q))
			}
		}
	}
}

// Left/right mirror: a left limb and its mirror image on the right read the
// same angles, for every joint function.
func TestMirrorLeftRight(t *testing.T) {
	r := rand.New(rand.NewPCG(31, 32))
	for i := 0; i < 300; i++ {
		p := rot.FromRotVec(vec(r.NormFloat64(), r.NormFloat64(), r.NormFloat64()))
		d := rot.FromRotVec(vec(r.NormFloat64(), r.NormFloat64(), r.NormFloat64()))
		pm, dm := mirrorSagittal(p), mirrorSagittal(d)
		if a, b := HumerothoracicAngles(p, d, SideLeft), HumerothoracicAngles(pm, dm, SideRight); angDiff(a.PlaneOfElevation, b.PlaneOfElevation) > 1e-9 ||
			math.Abs(a.Elevation-b.Elevation) > 1e-9 || angDiff(a.AxialRotation, b.AxialRotation) > 1e-9 {
			t.Fatalf("humerothoracic left %+v, mirrored right %+v", a, b)
		}
		if a, b := WristAnglesOf(p, d, SideLeft), WristAnglesOf(pm, dm, SideRight); angDiff(a.Flexion, b.Flexion) > 1e-9 ||
			angDiff(a.RadialDeviation, b.RadialDeviation) > 1e-9 || angDiff(a.Rotation, b.Rotation) > 1e-9 {
			t.Fatalf("wrist left %+v, mirrored right %+v", a, b)
		}
		if a, b := ElbowAnglesOf(p, d, SideLeft), ElbowAnglesOf(pm, dm, SideRight); angDiff(a.Flexion, b.Flexion) > 1e-9 ||
			angDiff(a.CarryingAngle, b.CarryingAngle) > 1e-9 || angDiff(a.Pronation, b.Pronation) > 1e-9 {
			t.Fatalf("elbow left %+v, mirrored right %+v", a, b)
		}
		// Trunk angles of a mirrored pose: flexion kept, lateral bend and
		// axial rotation change sign.
		a, b := BodyAnglesOf(p, d), BodyAnglesOf(pm, dm)
		if math.Abs(a.Flexion-b.Flexion) > 1e-9 || angDiff(a.LateralBend, -b.LateralBend) > 1e-9 || angDiff(a.AxialRotation, -b.AxialRotation) > 1e-9 {
			t.Fatalf("body %+v, mirrored %+v", a, b)
		}
	}
}

// Closed form: a single rotation of −90° about the mediolateral axis equals
// the Y-X′-Y″ (our Z-X′-Z″) angles plane 90°, −elevation −90°, axial −90°.
func TestCodmanIdentity(t *testing.T) {
	a := rot.FromAxisAngle(ey, -90*deg)
	b := rot.FromEuler(seqZXZ, 90*deg, -90*deg, -90*deg)
	if qdist(a, b) > 1e-15 {
		t.Fatalf("Ry(-90) = %v, Rz(90)Rx(-90)Rz(-90) = %v", a, b)
	}
}

type distalCase struct {
	name    string
	side    Side
	x, y, z r3.Vec
	a, b, c float64 // deg
}

// Closed form, ISB wrist definitions (Wu et al. 2005): flexion moves the
// fingers toward the palm, radial deviation toward the thumb. In our neutral
// pose the palm faces the thigh (−y for the left hand, +y for the right) and
// the thumb points forward (+x); the fingers point along −z.
func TestWristClosedForm(t *testing.T) {
	s40, c40 := sc(40)
	s15, c15 := sc(15)
	cases := []distalCase{
		{"left neutral", SideLeft, ex, ey, ez, 0, 0, 0},
		// Fingers (−z) toward the palm (−y): −z' = (0, −sin, −cos).
		{"left flexion 40", SideLeft, ex, vec(0, c40, -s40), vec(0, s40, c40), 40, 0, 0},
		{"left extension 40", SideLeft, ex, vec(0, c40, s40), vec(0, -s40, c40), -40, 0, 0},
		{"right flexion 40", SideRight, ex, vec(0, c40, s40), vec(0, -s40, c40), 40, 0, 0},
		// Fingers toward the thumb (+x): −z' = (sin, 0, −cos).
		{"left radial 15", SideLeft, vec(c15, 0, s15), ey, vec(-s15, 0, c15), 0, 15, 0},
		{"right radial 15", SideRight, vec(c15, 0, s15), ey, vec(-s15, 0, c15), 0, 15, 0},
		{"left ulnar 15", SideLeft, vec(c15, 0, -s15), ey, vec(s15, 0, c15), 0, -15, 0},
	}
	for _, c := range cases {
		a := WristAnglesOf(rot.Identity, frame(t, c.x, c.y, c.z), c.side)
		if math.Abs(a.Flexion-c.a*deg) > 1e-12 || math.Abs(a.RadialDeviation-c.b*deg) > 1e-12 || math.Abs(a.Rotation-c.c*deg) > 1e-12 {
			t.Errorf("%s: flexion %.6f radial %.6f rotation %.6f deg, want %g %g %g", c.name,
				a.Flexion/deg, a.RadialDeviation/deg, a.Rotation/deg, c.a, c.b, c.c)
		}
	}
}

// Closed form, ISB elbow definitions (Wu et al. 2005), zero in our neutral
// pose: flexion brings the forearm forward; pronation turns the palm from
// facing the thigh to facing backward; valgus moves the distal forearm away
// from the body.
func TestElbowClosedForm(t *testing.T) {
	s60, c60 := sc(60)
	s10, c10 := sc(10)
	cases := []distalCase{
		{"left neutral", SideLeft, ex, ey, ez, 0, 0, 0},
		// Forearm distal (−z) toward +x.
		{"left flexion 90", SideLeft, ez, ey, neg(ex), 90, 0, 0},
		{"right flexion 90", SideRight, ez, ey, neg(ex), 90, 0, 0},
		// Left palm (−y) toward −x, so y turns toward +x.
		{"left pronation 60", SideLeft, vec(c60, -s60, 0), vec(s60, c60, 0), ez, 0, 0, 60},
		// Right palm (+y) toward −x.
		{"right pronation 60", SideRight, vec(c60, s60, 0), vec(-s60, c60, 0), ez, 0, 0, 60},
		{"left supination 60", SideLeft, vec(c60, s60, 0), vec(-s60, c60, 0), ez, 0, 0, -60},
		// Distal forearm toward +y (lateral for the left arm).
		{"left valgus 10", SideLeft, ex, vec(0, c10, s10), vec(0, -s10, c10), 0, 10, 0},
		{"right valgus 10", SideRight, ex, vec(0, c10, -s10), vec(0, s10, c10), 0, 10, 0},
	}
	for _, c := range cases {
		a := ElbowAnglesOf(rot.Identity, frame(t, c.x, c.y, c.z), c.side)
		if math.Abs(a.Flexion-c.a*deg) > 1e-12 || math.Abs(a.CarryingAngle-c.b*deg) > 1e-12 || math.Abs(a.Pronation-c.c*deg) > 1e-12 {
			t.Errorf("%s: flexion %.6f carrying %.6f pronation %.6f deg, want %g %g %g", c.name,
				a.Flexion/deg, a.CarryingAngle/deg, a.Pronation/deg, c.a, c.b, c.c)
		}
	}
	// Flexed 90° and then pronated 60° about the forearm's own axis: the
	// sequence separates the two.
	q := rot.Mul(frame(t, ez, ey, neg(ex)), frame(t, vec(c60, -s60, 0), vec(s60, c60, 0), ez))
	if a := ElbowAnglesOf(rot.Identity, q, SideLeft); math.Abs(a.Flexion-90*deg) > 1e-12 || math.Abs(a.CarryingAngle) > 1e-12 || math.Abs(a.Pronation-60*deg) > 1e-12 {
		t.Errorf("left flexion 90 then pronation 60: %+v", a)
	}
}

// shaft returns a club orientation whose z axis (head → grip) is s.
func shaft(s r3.Vec) quat.Number {
	s = r3.Unit(s)
	axis := r3.Cross(ez, s)
	if r3.Norm(axis) < 1e-12 {
		if s.Z > 0 {
			return rot.Identity
		}
		return rot.FromAxisAngle(ex, math.Pi)
	}
	return rot.FromAxisAngle(axis, math.Acos(s.Z))
}

// Closed form: shaft lean in the target/vertical plane and shaft angle above
// the ground for constructed shafts.
func TestClubAngles(t *testing.T) {
	s10, c10 := sc(10)
	s60, c60 := sc(60)
	cases := []struct {
		name        string
		s           r3.Vec
		lean, plane float64
	}{
		{"vertical", ez, 0, 90},
		{"grip ahead 10", vec(0, s10, c10), 10, 80},
		{"grip behind 10", vec(0, -s10, c10), -10, 80},
		// Address with an iron: grip toward the player (−x) and up, 60°.
		{"address 60", vec(-c60, 0, s60), 0, 60},
		{"address 60 lean 10", vec(-c60, s60*s10, s60*c10), 10, math.Asin(s60*c10) / deg},
		{"grip below head", neg(ez), 180, -90},
		{"horizontal toward target", ey, 90, 0},
	}
	for _, c := range cases {
		a := ClubAnglesOf(shaft(c.s))
		if angDiff(a.ShaftLean, c.lean*deg) > 1e-9 || math.Abs(a.ShaftPlane-c.plane*deg) > 1e-7 {
			t.Errorf("%s: lean %.6f plane %.6f deg, want %g %g", c.name, a.ShaftLean/deg, a.ShaftPlane/deg, c.lean, c.plane)
		}
	}
}
