package swing

import (
	"math"

	"gonum.org/v1/gonum/num/quat"
	"gonum.org/v1/gonum/spatial/r3"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/rot"
)

// frame is the target-line frame of one swing: x_T the player's horizontal
// facing direction at address, z_T up, y_T = z_T × x_T (toward the target
// for a right-handed player). For a left-handed player the target lies
// along −y_T, and every orientation and angular velocity is mirrored
// through the x_T–z_T plane so that the numbers read as for a right-handed
// player.
type frame struct {
	// heading is the world heading of x_T, rad counter-clockwise from
	// world +x about +z.
	heading float64
	// toT turns world vectors into the target-line frame: Yaw(−heading);
	// c, s are cos and sin of the heading.
	toT    quat.Number
	c, s   float64
	mirror bool
}

// newFrame returns the frame whose x axis has the given world heading.
func newFrame(heading float64, left bool) frame {
	s, c := math.Sincos(heading)
	return frame{heading: heading, toT: rot.YawRotation(-heading), c: c, s: s, mirror: left}
}

// vector returns a world vector (a direction: polar) in the (mirrored)
// target-line frame: turned by −heading about z, then y → −y when
// mirrored.
func (f *frame) vector(v r3.Vec) r3.Vec {
	x, y := f.c*v.X+f.s*v.Y, -f.s*v.X+f.c*v.Y
	if f.mirror {
		y = -y
	}
	return r3.Vec{X: x, Y: y, Z: v.Z}
}

// pointer returns the pointer of segment s (see PointerAxis) with world
// orientation q, in the (mirrored) target-line frame: a column of q's
// rotation matrix, turned into the frame. The mirror of a direction
// carried by a mirrored orientation is the mirrored direction:
// M R M a = M R a for a = x or −z, both in the mirror plane (M a = a).
func (f *frame) pointer(s kinchainv1.Segment, q quat.Number) r3.Vec {
	w, x, y, z := q.Real, q.Imag, q.Jmag, q.Kmag
	var p r3.Vec
	if bodySegment(s) {
		p = r3.Vec{X: 1 - 2*(y*y+z*z), Y: 2 * (x*y + w*z), Z: 2 * (x*z - w*y)}
	} else {
		p = r3.Vec{X: -2 * (x*z + w*y), Y: -2 * (y*z - w*x), Z: -(1 - 2*(x*x+y*y))}
	}
	return f.vector(p)
}

// headingFromTarget returns the heading of x_T for a target direction
// (world heading toward the target, rad): the target is +y_T for a
// right-handed player, −y_T for a left-handed one.
func headingFromTarget(target float64, left bool) float64 {
	if left {
		return wrapPi(target + math.Pi/2)
	}
	return wrapPi(target - math.Pi/2)
}

// Mirror returns the mirror image through the x–z plane of an orientation
// expressed in that frame: R' = M R M with M = diag(1, −1, 1), which maps
// the quaternion (w, x, y, z) to (w, −x, y, −z). The result is a proper
// rotation whose axes are again anterior, left and superior of the mirrored
// body.
func Mirror(q quat.Number) quat.Number {
	return quat.Number{Real: q.Real, Imag: -q.Imag, Jmag: q.Jmag, Kmag: -q.Kmag}
}

// MirrorAngularVelocity returns the mirror image through the x–z plane of
// an angular velocity (a pseudovector): ω' = −M ω = (−x, y, −z).
func MirrorAngularVelocity(w r3.Vec) r3.Vec {
	return r3.Vec{X: -w.X, Y: w.Y, Z: -w.Z}
}

// orientation returns a world orientation expressed in the (mirrored)
// target-line frame.
func (f *frame) orientation(q quat.Number) quat.Number {
	q = rot.Mul(f.toT, q)
	if f.mirror {
		q = Mirror(q)
	}
	return q
}

// omega returns a world angular velocity expressed in the (mirrored)
// target-line frame.
func (f *frame) omega(w r3.Vec) r3.Vec {
	x, y := f.c*w.X+f.s*w.Y, -f.s*w.X+f.c*w.Y
	if f.mirror {
		return r3.Vec{X: -x, Y: y, Z: -w.Z}
	}
	return r3.Vec{X: x, Y: y, Z: w.Z}
}

// bodySegment reports whether s is a trunk segment (pelvis, thorax, head),
// whose pointer is its anterior axis and whose plane is horizontal.
func bodySegment(s kinchainv1.Segment) bool {
	return s == kinchainv1.Segment_SEGMENT_PELVIS || s == kinchainv1.Segment_SEGMENT_THORAX ||
		s == kinchainv1.Segment_SEGMENT_HEAD
}

// PointerAxis is the segment-frame axis whose direction the swing angles
// follow: the anterior axis x of the trunk segments (pelvis, thorax, head),
// the distal direction −z of the limbs and the club (shoulder → elbow,
// elbow → wrist, wrist → fingers, grip → club head). The lead-arm level
// events watch the lead upper arm's.
func PointerAxis(s kinchainv1.Segment) r3.Vec {
	if bodySegment(s) {
		return r3.Vec{X: 1}
	}
	return r3.Vec{Z: -1}
}

// minPlaneSine is the smallest sine of the angle between a limb's address
// pointer and the target line for which the pointer and the target line
// define its swing plane; below it the horizontal plane is used.
const minPlaneSine = 0.34 // sin 20°

// plane is the swing plane of one segment: unit normal n and the in-plane
// unit vectors e1 (the address pointer's direction) and e2 = n × e1, all in
// the (mirrored) target-line frame. The in-plane angle of a pointer p is
// atan2(p·e2, p·e1): zero at address and increasing toward the target.
type plane struct {
	n, e1, e2 r3.Vec
}

// planeFor returns the swing plane of a segment whose pointer at address is
// p (target-line frame). Trunk segments and limbs whose pointer lies within
// 20° of the target line turn in the horizontal plane (n = z_T, e1 the
// pointer's horizontal direction); the others in the plane spanned by the
// target line and the address pointer, n = (p × y_T)/|p × y_T|, so that a
// positive angle moves the pointer toward the target. ok is false when no
// plane exists (a trunk pointer vertical at address).
func planeFor(s kinchainv1.Segment, p r3.Vec) (pl plane, ok bool) {
	y := r3.Vec{Y: 1}
	if !bodySegment(s) {
		c := r3.Cross(p, y)
		if nc := norm(c); nc >= minPlaneSine {
			n := r3.Scale(1/nc, c)
			e1 := unit(r3.Sub(p, r3.Scale(r3.Dot(p, n), n)))
			return plane{n: n, e1: e1, e2: r3.Cross(n, e1)}, true
		}
	}
	h := r3.Vec{X: p.X, Y: p.Y}
	nh := norm(h)
	if nh < 1e-6 {
		return plane{}, false
	}
	e1 := r3.Scale(1/nh, h)
	n := r3.Vec{Z: 1}
	return plane{n: n, e1: e1, e2: r3.Cross(n, e1)}, true
}

// angle returns the in-plane angle of pointer p, rad in (−π, π].
func (pl *plane) angle(p r3.Vec) float64 {
	return math.Atan2(r3.Dot(p, pl.e2), r3.Dot(p, pl.e1))
}

// rate returns dφ/dt, the rate of the in-plane angle of the unit pointer p
// moving with angular velocity w (rad/s), from ṗ = ω × p:
//
//	dφ/dt = n·(p × ṗ)/|p_⊥|² = (ω·n − (p·n)(p·ω)) / (1 − (p·n)²),
//
// p_⊥ the pointer's projection on the plane. It returns 0 when the pointer
// is within 0.1° of the normal, where the angle is undefined.
func (pl *plane) rate(p, w r3.Vec) float64 {
	pn := r3.Dot(p, pl.n)
	den := 1 - pn*pn
	if den < 3e-6 {
		return 0
	}
	return (r3.Dot(w, pl.n) - pn*r3.Dot(p, w)) / den
}

func unit(v r3.Vec) r3.Vec {
	n := norm(v)
	if n == 0 {
		return v
	}
	return r3.Scale(1/n, v)
}

// wrapPi maps an angle to (−π, π]. Inputs far outside (beyond ±64π) are
// reduced with math.Remainder first; the loops handle the common case of a
// difference of two wrapped angles cheaply.
func wrapPi(x float64) float64 {
	if x > 64*math.Pi || x < -64*math.Pi {
		x = math.Remainder(x, 2*math.Pi)
	}
	for x > math.Pi {
		x -= 2 * math.Pi
	}
	for x <= -math.Pi {
		x += 2 * math.Pi
	}
	return x
}

// norm returns |v| (without the overflow care of r3.Norm, which speeds
// never need).
func norm(v r3.Vec) float64 { return math.Sqrt(v.X*v.X + v.Y*v.Y + v.Z*v.Z) }
