// Package fusion estimates each sensor's orientation from raw inertial
// readings (gyroscope, accelerometer, optionally magnetometer), for sensor
// suits that send those instead of orientations.
//
// The estimator is VQF: D. Laidig and T. Seel, "VQF: Highly accurate IMU
// orientation estimation with bias estimation and magnetic disturbance
// rejection", Information Fusion 91 (2023) 187–204. It is implemented here in
// pure Go from the paper's equations, written from memory of the paper and of
// its authors' published reference implementation; every default parameter is
// the paper's (compared with that implementation's parameter documentation)
// and is documented on Params. The filter is causal: Filter runs
// sample by sample, so it serves live streams as well as whole captures.
//
// Frames: a quaternion (w, x, y, z) rotates vectors from the sensor frame
// into the world frame, world z up (against gravity). With a magnetometer
// (9D) the world frame is VQF's: x toward magnetic east, y toward magnetic
// north, z up (ENU with magnetic north). Without one (6D) the heading is
// free: it starts from the sensor's initial heading and drifts with the
// gyroscope's residual bias.
//
// Track fuses one capture track and reports golf-specific findings the
// filter cannot repair: gyroscope saturation (a club can exceed a 2000 °/s
// gyroscope) and accelerometer clipping near impact.
//
// Madgwick and Mahony hold the two classic complementary filters, computed
// step for step as the npm package ahrs 1.3.3 does, as baselines for the
// benchmark tests.
package fusion
