#!/usr/bin/python3
"""Writes the scipy golden files that internal/rot's Euler angles and
internal/kinematics' joint angles are tested against.

Run with Debian's python3-scipy from the repository root:

    /usr/bin/python3 testdata/golden/scipy/gen_euler.py

The output is deterministic (fixed seeds). CI runs no Python: the JSON files
written next to this script are committed.

Quaternions are written scalar-first (w, x, y, z), as kinchain stores them;
scipy itself is scalar-last. Angles are in rad.

Files:
  euler.json   scipy.spatial.transform.Rotation.as_euler for intrinsic
               (upper-case) sequences: random rotations, elementary rotations,
               rotations whose middle angle sits 1e-3 and 1e-5 rad from the
               singular value, and rotations exactly at gimbal lock (scipy then
               sets the third angle to zero, as rot.Euler does).
  joints.json  joint angles computed here by changing basis into the ISB axes
               (Wu et al. 2002, 2005) and calling as_euler on the ISB sequence,
               a formulation independent of the Go code, which instead renames
               the sequence's axes. See DEVELOPERS.md (Kinematics, Joint
               angles) for the tables.

Axes. Our segment frames: x anterior, y left, z superior. ISB frames (right
side): X anterior, Y superior (long axis), Z to the right. Left-side segments
are reflected through the sagittal plane (y -> -y), R' = M R M with
M = diag(1, -1, 1), which turns a left limb into the equivalent right limb.
The columns of P are the ISB axes written in our axes, so a relative rotation
R (distal in proximal, our axes) is P^T R P in ISB axes.
"""

import json
import math
import os

import numpy as np
import scipy
from scipy.spatial.transform import Rotation

HERE = os.path.dirname(os.path.abspath(__file__))

M = np.diag([1.0, -1.0, 1.0])
# ISB X anterior, Y superior, Z right  ==  our (x, z, -y).
P_TRUNK = np.array([[1.0, 0, 0], [0, 0, 1.0], [0, -1.0, 0]]).T
# Humerus and forearm for the elbow: the same axes (our neutral pose is zero).
P_ARM = P_TRUNK
# Wrist (right hand, palm toward the thigh in our neutral pose): ISB X volar
# (our +y), Y proximal (our +z), Z radial (our +x).
P_WRIST = np.array([[0, 1.0, 0], [0, 0, 1.0], [1.0, 0, 0]]).T


def wxyz(r):
    x, y, z, w = r.as_quat()
    return [w, x, y, z]


def from_wxyz(q):
    w, x, y, z = q
    return Rotation.from_quat([x, y, z, w])


def wrap(a):
    return math.atan2(math.sin(a), math.cos(a))


def as_euler(r, seq):
    """as_euler with scipy's gimbal-lock warning turned into a flag."""
    import warnings
    with warnings.catch_warnings(record=True) as w:
        warnings.simplefilter("always")
        ang = r.as_euler(seq)
    return [float(a) for a in ang], any("Gimbal lock" in str(x.message) for x in w)


def euler_cases():
    rng = np.random.default_rng(20240611)
    seqs = ["ZYX", "XYZ", "YXZ", "ZXY", "YZX", "XZY", "YXY", "ZXZ", "ZYZ", "XYX"]
    cases = []
    for seq in seqs:
        proper = seq[0] == seq[2]
        rots = []
        for r in Rotation.random(40, random_state=rng):
            rots.append(("random", r))
        for ax in range(3):
            ang = [0.0, 0.0, 0.0]
            ang[ax] = 0.7
            rots.append(("elementary", Rotation.from_euler(seq, ang)))
        singular = [0.0, math.pi] if proper else [math.pi / 2, -math.pi / 2]
        for s in singular:
            for d in (1e-3, 1e-5):
                for sign in (1.0, -1.0):
                    mid = s + sign * d
                    if proper and not (0 < mid < math.pi):
                        continue
                    a, c = rng.uniform(-math.pi, math.pi, 2)
                    rots.append(("near_lock", Rotation.from_euler(seq, [a, mid, c])))
            a, c = rng.uniform(-1.5, 1.5, 2)
            rots.append(("lock", Rotation.from_euler(seq, [a, s, c])))
        for kind, r in rots:
            ang, locked = as_euler(r, seq)
            cases.append({"seq": seq, "kind": kind, "q": wxyz(r), "angles": ang, "locked": locked})
    return cases


def rel(p, d):
    return p.as_matrix().T @ d.as_matrix()


def to_isb(rm, P, left):
    if left:
        rm = M @ rm @ M
    return Rotation.from_matrix(P.T @ rm @ P)


def body(p, d):
    # Product sequence Z-Y'-X'' on our axes: axial rotation, flexion, lateral bend.
    ang, locked = as_euler(Rotation.from_matrix(rel(p, d)), "ZYX")
    return ang, locked


def trunk_isb(p, d):
    # Wu et al. 2002 spine JCS: Z (flexion/extension), floating X (lateral
    # bending), Y (axial rotation), ISB axes. By the right-hand rule about
    # ISB +Z (right) a forward bend is negative, about +X (anterior) a bend to
    # the right is positive, about +Y (up) a turn to the left is positive.
    # Reported with the product's signs: flexion forward, lateral bend to the
    # right (trail side), axial rotation to the left (toward the target).
    (al, be, ga), locked = as_euler(to_isb(rel(p, d), P_TRUNK, False), "ZXY")
    return [-al, be, ga], locked


def humerothoracic(p, d, left):
    # Wu et al. 2005 humerothoracic Y-X'-Y'': R = Ry(plane) Rx(-elevation)
    # Ry(axial), elevation in [0, pi]. scipy's middle angle is in [0, pi], so
    # the solution with the negated middle angle is (a + pi, -b, c - pi).
    r = to_isb(rel(p, d), P_TRUNK, left)
    (a, b, c), locked = as_euler(r, "YXY")
    if locked:
        # Convention: plane of elevation 0, the whole rotation about the long
        # axis in axial rotation. scipy set c = 0; near b = 0 the rotation is
        # Ry(a), near b = pi it is Ry(a) Rx(pi) = Ry(0) Rx(-pi) Ry(-a).
        return [0.0, b, wrap(a) if b < math.pi / 2 else wrap(-a)], locked
    return [wrap(a + math.pi), b, wrap(c - math.pi)], locked


def wrist(p, d, left):
    # Wu et al. 2005 wrist JCS Z-X'-Y'': flexion about the forearm's radial
    # axis (ISB Z; positive flexion by the right-hand rule), deviation about
    # the floating axis (ISB X volar; positive ulnar by the right-hand rule),
    # rotation about the hand's long axis (ISB Y). Reported: flexion,
    # radial deviation (= -ulnar), rotation.
    (al, be, ga), locked = as_euler(to_isb(rel(p, d), P_WRIST, left), "ZXY")
    return [al, -be, ga], locked


def elbow(p, d, left):
    # Wu et al. 2005 elbow JCS Z-X'-Y'': flexion about the humerus' Z (right;
    # positive flexion by the right-hand rule), carrying angle about the
    # floating X (right-hand rule positive = varus; reported positive valgus),
    # pronation about the forearm's Y (positive pronation), zero in our
    # neutral pose (palm toward the thigh).
    (al, be, ga), locked = as_euler(to_isb(rel(p, d), P_ARM, left), "ZXY")
    return [al, -be, ga], locked


def club(q):
    s = q.as_matrix() @ np.array([0.0, 0.0, 1.0])
    return [math.atan2(s[1], s[2]), math.asin(max(-1.0, min(1.0, s[2])))]


def joint_cases():
    rng = np.random.default_rng(7031)
    out = []
    pairs = [(a, b) for a, b in zip(Rotation.random(60, random_state=rng),
                                     Rotation.random(60, random_state=rng))]
    # Relative rotations near the arm's gimbal lock (elevation 0.5 deg, and
    # exactly 0 and 180 deg) with a random proximal frame.
    for elev in (math.radians(0.5), 0.0, math.pi, math.pi - math.radians(0.5)):
        p = Rotation.random(random_state=rng)
        a, c = rng.uniform(-math.pi, math.pi, 2)
        for left in (True, False):
            r = Rotation.from_euler("YXY", [a, -elev, c])
            rm = P_TRUNK @ r.as_matrix() @ P_TRUNK.T
            if left:
                rm = M @ rm @ M
            d = Rotation.from_matrix(p.as_matrix() @ rm)
            ang, locked = humerothoracic(p, d, left)
            out.append({"kind": "humerothoracic", "left": left, "p": wxyz(p), "d": wxyz(d),
                        "angles": ang, "locked": locked})
    for p, d in pairs:
        ang, locked = body(p, d)
        out.append({"kind": "body", "left": False, "p": wxyz(p), "d": wxyz(d), "angles": ang, "locked": locked})
        ang, locked = trunk_isb(p, d)
        out.append({"kind": "trunk_isb", "left": False, "p": wxyz(p), "d": wxyz(d), "angles": ang, "locked": locked})
        for left in (True, False):
            for kind, fn in (("humerothoracic", humerothoracic), ("wrist", wrist), ("elbow", elbow)):
                ang, locked = fn(p, d, left)
                out.append({"kind": kind, "left": left, "p": wxyz(p), "d": wxyz(d), "angles": ang, "locked": locked})
        out.append({"kind": "club", "left": False, "p": [1.0, 0.0, 0.0, 0.0], "d": wxyz(d),
                    "angles": club(d), "locked": False})
    return out


def write(name, obj):
    obj = dict(obj)
    obj["generator"] = "testdata/golden/scipy/gen_euler.py, scipy %s, numpy %s" % (
        scipy.__version__, np.__version__)
    with open(os.path.join(HERE, name), "w") as f:
        json.dump(obj, f, indent=None, separators=(",", ":"))
        f.write("\n")


def main():
    write("euler.json", {"cases": euler_cases()})
    write("joints.json", {"cases": joint_cases()})


if __name__ == "__main__":
    main()
