// Package bvh reads BVH motion files (a skeleton HIERARCHY followed by
// per-frame MOTION channels, as written by optical motion-capture software)
// and converts chosen joints into a kinchainv1.Capture, so that recorded
// human motion such as the CMU golf swings in /work/shared/data/cmu-golf can
// be fed to the analysis.
//
// A joint's rotation channels are applied in the order listed, intrinsic:
// for "Zrotation Yrotation Xrotation" the local rotation is Rz·Ry·Rx, each
// relative to the parent joint. Global orientations chain from the root.
//
// ToCapture turns the file's Y-up world into kinchain's z-up world by the
// proper rotation of +90° about the file's X axis, (X, Y, Z) → (X, −Z, Y),
// and gives each segment the kinchain frame (x anterior, y left, z superior)
// derived from the skeleton's rest pose; see ToCapture. The package bvhtest
// locates the shared CMU files for tests.
package bvh
