// Package stream analyses a live capture: the StreamCapture protocol's
// session state behind the gRPC handler.
//
// A stream opens with a header (segments, handedness, options, nominal
// rate), then brings batches of samples per segment. NewSession checks the
// header; Push checks a batch (errors name the field and sample:
// batch.tracks[1].time_s[3]) and appends its samples to one fixed-capacity
// ring buffer per segment; Close ends the stream.
//
// A causal detector runs on the driver segment (the club, else the lead
// hand, forearm or upper arm, as in the swing package) one sample at a time
// and reports each event as soon as it is decided: address, takeaway and
// top once the reversal of a backswing long enough for a swing is seen,
// impact the sample after the driver's angle in its swing plane returns to
// its address value, the lead-arm-level events as the arm passes
// horizontal, and the finish once the speed has fallen to the swing
// package's finish level and stopped falling. When a swing is finished,
// the buffered window from PreRoll before its first movement to PostRoll
// after its finish is copied out, validated and analysed by the same
// engine call as the unary AnalyzeCapture (engine.AnalyzeValidated), and
// the swing's SwingReport is sent with the stream's swing index. Close
// analyses a swing still in its follow-through and sends a StreamSummary.
//
// Memory per stream is bounded by Limits whatever the stream's length: the
// rings never grow past their capacity, and every other piece of state is
// of fixed size. DEVELOPERS.md ("Live streams") gives the protocol, the
// event definitions and the latency and memory bounds; its "Which test
// checks what" gives the agreement with the unary analysis.
package stream
