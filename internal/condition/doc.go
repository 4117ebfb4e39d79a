// Package condition turns a validated capture into evenly sampled, calibrated
// segment orientations that the kinematics stage can difference:
//
//   - hemisphere continuity of each quaternion stream (Continuity);
//   - per-track quality figures and data-quality warnings (rate, timing
//     jitter, gaps, renormalised samples, sensor saturation);
//   - sensor-to-segment alignment from a neutral-pose window, or from explicit
//     mountings;
//   - resampling of every track onto one uniform grid by SLERP (orientation)
//     and linear interpolation (gyroscope, accelerometer), with gaps longer
//     than a bound left unbridged and marked invalid;
//   - the zero-phase Butterworth low-pass filter (Butterworth, FiltFilt,
//     Filter) that the kinematics stage applies to angular velocity, and
//     Winter's residual analysis for choosing its cutoff (ResidualCutoff).
//
// Run performs the first four steps; the filter is a tool for later stages.
// Definitions, defaults and thresholds are listed with their sources in
// DEVELOPERS.md.
package condition
