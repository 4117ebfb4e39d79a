// Package swing finds the swings in a capture's kinematics and describes
// each one: its events, every segment's transition, the kinematic sequence
// (peak speeds and their order), the gains between adjacent links, the
// tempo and the posture at each event. Analyze is the entry point.
//
// # Frame and handedness
//
// Each swing has its target-line frame, fixed at its address: x_T the
// horizontal heading of the pelvis's anterior axis (the thorax's without a
// pelvis), z_T up, y_T = z_T × x_T, toward the target for a right-handed
// player. Options.TargetHeading (the world direction toward the target)
// overrides the pelvis. A left-handed capture is mirrored through the
// x_T–z_T plane before analysis, orientations (w, x, y, z) → (w, −x, y, −z)
// and angular velocities (x, y, z) → (−x, y, −z), with lead and trail
// keeping their names, so every number reads as for a right-handed player.
//
// # Swing angles
//
// Every segment has a pointer and a swing plane fixed at address: the
// trunk segments (pelvis, thorax, head) their anterior axis in the
// horizontal plane; the limbs and the club their distal direction −z in the
// plane spanned by the target line and that direction at address. The
// in-plane angle φ is zero at address and positive toward the target; its
// rate is dφ/dt = (ω·n − (p·n)(p·ω))/(1 − (p·n)²).
//
// # Events
//
// The driver is the most distal present of club, lead hand, lead forearm,
// lead upper arm; when it yields no swing in the whole capture, the next one
// is tried (a gap across the club's top, or a hand frame that follows the
// forearm's twist). Movement episodes are spans where the driver moves (speed
// above its still level), joined across pauses shorter than MergeGap. In an
// episode, the fastest moment preceded by motion in the opposite sense is a
// candidate downswing; around it:
//
//   - top: the driver's reversal at the extreme of its backswing, the
//     smallest φ before it, timed by the sign change of dφ/dt next to it;
//   - takeaway: back from the top through the backswing to where the
//     driver's speed rises through its onset level;
//   - address: the last sample before the takeaway at which every present
//     segment is still; when none lies within AddressLookback, the sample
//     before the takeaway at which the driver is slowest;
//   - impact: the driver's angle returns to its address value (φ from < 0
//     to ≥ 0) after the top; with accelerometer readings, moved to the
//     ball-strike shock when one is found within ShockWindow;
//   - finish: the driver's speed falls to max(FinishStillFactor × still,
//     FinishFraction × peak) and stops falling;
//   - lead arm level, backswing and downswing: the lead upper arm's long
//     axis passes horizontal going up (first crossing after the address)
//     and coming down (last crossing before impact);
//   - transition of each segment: the same reversal of its own φ before
//     its fastest moment between the top and 100 ms after impact, when it
//     moved back and forward faster than its still level.
//
// Crossings are interpolated linearly between samples. A candidate whose
// driver turns back less than the driver's amplitude limit, or peaks below
// its speed limit, or does not return to its address angle, is rejected
// with a SWING_REJECTED warning naming the reasons and the time.
//
// # Sequence
//
// Each present segment's peak speed (the selected speed definition) is
// the largest in its downswing window, from the earlier of the top and its
// own transition to DownswingAfterImpact after impact (counted in whole
// samples from the impact sample, so that the window does not depend on
// where the grid starts), refined by
// three-point parabolic interpolation. Gains compare adjacent present links
// of pelvis → thorax → lead upper arm → lead hand → club;
// proximal_to_distal requires those links to peak in that order, each
// faster than the last.
package swing
