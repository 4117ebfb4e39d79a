// Package synth is the synthetic model golfer: an invented player whose
// every segment moves by closed-form angle profiles, so that the ground
// truth of any analysis (event times, transitions, peak speeds, posture
// angles) is known exactly. Generate samples it into a kinchainv1.Capture
// and returns its Truth; Model gives the closed-form orientation, angular
// velocity and sensor acceleration at any time. Nothing here is measured
// data: every number is our own design.
//
// # Frames
//
// The model is built in the right-handed target-line frame T: x_T the
// player's horizontal facing direction, y_T toward the target (the
// player's left), z_T up. The world orientation is Yaw(ψ) ⊗ q_T, ψ the
// heading of x_T (Config.TargetHeadingDeg − 90°). A left-handed player is
// the mirror image through the x_T–z_T plane: q_T → (w, −x, y, −z),
// ω_T → (−ωx, ωy, −ωz), positions y → −y; the target then lies along −y_T
// (ψ = TargetHeadingDeg + 90°) and lead/trail keep their names.
//
// # Segments
//
// Pelvis, thorax and head are target-frame Z-Y'-X” Cardan rotations:
// q = R_z(axial)·R_y(flexion)·R_x(lateral bend); positive axial rotation
// turns toward the target, positive flexion bends forward, positive lateral
// bend tilts toward the trail side, so their posture angles are truth by
// construction (thorax flexion at address 38° by default). The other seven
// segments (upper arms, forearms, hands, club) turn about one fixed axis,
// the swing-plane normal n = (p_club × y_T)/|p_club × y_T|, p_club the club
// shaft's address direction (grip → head, 60° below horizontal, 4° of
// forward lean): q = R_n(θ)·q_address·R_z(ρ), θ the segment's drive angle
// (positive toward the target) and ρ a roll about its own long axis. Each
// limb's −z axis (its "pointer") therefore stays on a cone about n and
// reverses exactly when θ does; it returns to its address angle exactly when
// θ = 0.
//
// # Profiles
//
// Each swing gives every segment a drive (see drive): a backswing of
// amplitude A from its start to its transition T, ending with a finite
// angular acceleration (a clean reversal); a rise to the peak speed V at P;
// a fall to rest at F. Velocity and acceleration are continuous. Secondary
// angles (flexion, lateral bend, roll) are minimum-jerk ramps through
// keyframes at the start, T, P and F; they stand still at P, so the peak
// speed of each segment is exactly V at P. The club's backswing amplitude is
// solved so that it returns to its address angle exactly at the impact
// time; the club's transition is the top. Waggles are there-and-back
// minimum-jerk ramps of the club and hands (30° for the club); half swings
// are the full swing with amplitudes and speeds scaled by 0.35. After each
// swing but the last the player holds the finish 0.6 s and returns to
// address in 1.2 s.
//
// # Default design (right-handed, 0.25 s downswing, tempo 3:1)
//
//	segment           start  transition  peak     peak speed  backswing
//	                  (s after takeaway; s from top; s from impact; °/s; °)
//	pelvis            0.050   −0.045     −0.075     580          50
//	thorax            0.030   −0.030     −0.050     820          90
//	head              0.050   −0.010     −0.020     150           8
//	lead upper arm    0.010   −0.020     −0.030    1150         130
//	lead forearm      0.005   −0.015     −0.022    1400         150
//	lead hand         0       −0.008     −0.015    1800         185
//	trail upper arm   0.010   −0.020     −0.035     900         100
//	trail forearm     0.005   −0.015     −0.025    1200         130
//	trail hand        0       −0.008     −0.015    1700         180
//	club              0        0         −0.004    2200         ≈292 (solved)
//
// Takeaway at 1 s, top 0.75 s later, impact 0.25 s after the top. Time
// offsets scale with Config.Downswing/0.25 and speeds inversely. The faults:
// LateThorax moves the thorax's transition to the top and its peak to
// −0.020 s (after the lead arm); EarlyRelease moves the club's peak to
// −0.045 s (before the lead arm and hand) at 88 % of the speed.
//
// # Sensors
//
// Orientation columns are the sensor orientation q_segment ⊗ mounting
// (Config.MountingDeg, recorded in the track), optionally with white
// rotation noise. The gyroscope reads ω in the sensor frame; the
// accelerometer reads the specific force a − g of the sensor point, each
// segment hanging from its parent at a joint (pelvis fixed at 0.95 m), plus
// the ball-strike shock on the club at impact. Truth is computed from the
// closed form on a 20 µs grid with golden-section and bisection refinement,
// never from the samples.
package synth
