// Package kinematics derives segment motion from conditioned orientations:
// angular velocity in the world and segment frames (from orientation
// differences or the gyroscope), its zero-phase low-pass filtering, the
// scalar segment speeds (magnitude, vertical, long axis) and their peaks.
// Definitions, defaults and sources are listed in DEVELOPERS.md.
package kinematics
