// Package validate checks a decoded capture (kinchainv1.Capture) and
// analysis options against kinchain's rules and limits, and turns a good
// capture into the in-memory form every later stage reads
// (capture.Capture).
//
// Every failure is an *Error that names the field, the sample and, for CSV
// input, the file line, e.g.
//
//	tracks[2].time_s[118] (line 120): not after the previous sample (0.117 s ≤ 0.118 s)
//
// and carries a Reason from a small fixed set, usable as a metric label.
// Capture returns the first problem it finds, in a documented order, so that
// a client always gets one clear error.
package validate
