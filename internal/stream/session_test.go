package stream

import (
	"errors"
	"math"
	"strings"
	"testing"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/capture"
	"github.com/kinchain/kinchain/internal/synth"
	"github.com/kinchain/kinchain/internal/validate"
)

func header(segs ...kinchainv1.Segment) *kinchainv1.StreamHeader {
	return &kinchainv1.StreamHeader{CaptureId: "t", Segments: segs, RateHz: 1000}
}

// stillBatch returns n still samples of each segment from t0 at 1 kHz.
func stillBatch(t0 float64, n int, segs ...kinchainv1.Segment) *kinchainv1.SampleBatch {
	b := &kinchainv1.SampleBatch{}
	for _, s := range segs {
		tr := &kinchainv1.Track{Segment: s}
		for k := 0; k < n; k++ {
			tr.TimeS = append(tr.TimeS, t0+float64(k)/1000)
			tr.Qw = append(tr.Qw, 1)
			tr.Qx = append(tr.Qx, 0)
			tr.Qy = append(tr.Qy, 0)
			tr.Qz = append(tr.Qz, 0)
		}
		b.Tracks = append(b.Tracks, tr)
	}
	return b
}

// TestCloseWithoutBatches: a stream closed right after its header sums up
// zero samples and no swings.
func TestCloseWithoutBatches(t *testing.T) {
	s, err := NewSession(header(kinchainv1.Segment_SEGMENT_PELVIS, kinchainv1.Segment_SEGMENT_CLUB), Limits{})
	if err != nil {
		t.Fatal(err)
	}
	out := s.Close()
	if len(out) != 1 || out[0].GetSummary() == nil {
		t.Fatalf("Close gave %v, want just a summary", out)
	}
	sum := out[0].GetSummary()
	if sum.GetSamples() != 0 || sum.GetSwings() != 0 || sum.GetDurationS() != 0 || len(sum.GetQuality().GetTracks()) != 0 {
		t.Errorf("summary %v, want zero samples, swings, duration and tracks", sum)
	}
	// Close is idempotent, and a closed session refuses batches.
	if again := s.Close(); len(again) != 1 || again[0].GetSummary().GetSamples() != 0 {
		t.Errorf("second Close gave %v", again)
	}
	_, err = s.Push(stillBatch(0, 10, kinchainv1.Segment_SEGMENT_PELVIS))
	var ve *validate.Error
	if !errors.As(err, &ve) || ve.Field != "batch" {
		t.Errorf("Push after Close: %v", err)
	}
}

// TestSummaryCounts: samples, duration and per-track quality of a short
// still stream, and the stream-level warnings (gaps, no driver).
func TestSummaryCounts(t *testing.T) {
	p := kinchainv1.Segment_SEGMENT_PELVIS
	s, err := NewSession(header(p), Limits{})
	if err != nil {
		t.Fatal(err)
	}
	for _, b := range []*kinchainv1.SampleBatch{stillBatch(0, 500, p), stillBatch(0.6, 400, p)} {
		if out, err := s.Push(b); err != nil || len(out) != 0 {
			t.Fatalf("push: %v %v", out, err)
		}
	}
	sum := s.Close()[0].GetSummary()
	if sum.GetSamples() != 900 {
		t.Errorf("%d samples, want 900", sum.GetSamples())
	}
	if d := sum.GetDurationS(); math.Abs(d-0.999) > 1e-9 {
		t.Errorf("duration %g s, want 0.999", d)
	}
	q := sum.GetQuality().GetTracks()
	if len(q) != 1 || q[0].GetSamples() != 900 || q[0].GetGaps() != 1 || math.Abs(q[0].GetEffectiveRateHz()-1000) > 1e-6 ||
		math.Abs(q[0].GetLongestGapMs()-101) > 1e-6 {
		t.Errorf("track quality %v: want 900 samples, one gap of 101 ms, 1000 Hz", q)
	}
	codes := map[kinchainv1.WarningCode]bool{}
	for _, w := range sum.GetQuality().GetWarnings() {
		codes[w.GetCode()] = true
	}
	if !codes[kinchainv1.WarningCode_WARNING_CODE_GAP_NOT_BRIDGED] || !codes[kinchainv1.WarningCode_WARNING_CODE_SEGMENTS_MISSING] {
		t.Errorf("warnings %v: want a gap and the missing driver", sum.GetQuality().GetWarnings())
	}
}

// TestBatchLimits: the whole-batch sample limit and the buffer-bytes
// limit.
func TestBatchLimits(t *testing.T) {
	p, c := kinchainv1.Segment_SEGMENT_PELVIS, kinchainv1.Segment_SEGMENT_CLUB
	s, err := NewSession(header(p, c), Limits{MaxBatchSamples: 100})
	if err != nil {
		t.Fatal(err)
	}
	_, err = s.Push(stillBatch(0, 51, p, c))
	var ve *validate.Error
	if !errors.As(err, &ve) || ve.Field != "batch.tracks" || ve.Reason != validate.ReasonTooLarge {
		t.Errorf("102 samples under a limit of 100: %v", err)
	}
	if s.samples != 0 || s.segs[0].ring != nil {
		t.Error("a refused batch left samples behind")
	}
	// Ten segments at 10 kHz with every array: more than 32 MiB of rings.
	all := synth.AllSegments
	h := &kinchainv1.StreamHeader{Segments: all, RateHz: 10000}
	if _, err := NewSession(h, Limits{}); err == nil || !strings.Contains(err.Error(), "header.rate_hz") {
		t.Errorf("ten segments at 10 kHz: %v", err)
	}
	// Two segments at 5 kHz fit with quaternions; gyroscope, accelerometer,
	// magnetometer and position arrays on top do not.
	h = &kinchainv1.StreamHeader{Segments: []kinchainv1.Segment{p, c}, RateHz: 5000}
	s, err = NewSession(h, Limits{MaxBufferBytes: 12 << 20})
	if err != nil {
		t.Fatal(err)
	}
	b := stillBatch(0, 10, p)
	tr := b.Tracks[0]
	for k := 0; k < 10; k++ {
		tr.Gx, tr.Gy, tr.Gz = append(tr.Gx, 0), append(tr.Gy, 0), append(tr.Gz, 0)
		tr.Ax, tr.Ay, tr.Az = append(tr.Ax, 0), append(tr.Ay, 0), append(tr.Az, 9.8)
		tr.Mx, tr.My, tr.Mz = append(tr.Mx, 20), append(tr.My, 0), append(tr.Mz, -40)
		tr.Px, tr.Py, tr.Pz = append(tr.Px, 0), append(tr.Py, 0), append(tr.Pz, 1)
	}
	if _, err := s.Push(b); err != nil {
		t.Fatalf("first segment with all arrays: %v", err)
	}
	b.Tracks[0].Segment = c
	_, err = s.Push(b)
	if !errors.As(err, &ve) || ve.Field != "batch.tracks[0]" || ve.Reason != validate.ReasonTooLarge {
		t.Errorf("second segment with all arrays: %v", err)
	}
}

// TestSwingReportedAtClose: a stream that ends in the follow-through still
// gets the report of the swing whose impact it saw, from Close.
func TestSwingReportedAtClose(t *testing.T) {
	capt, truth, err := synth.Generate(synth.Config{})
	if err != nil {
		t.Fatal(err)
	}
	cut := truth.Swings[0].Impact + 0.1
	for _, tr := range capt.Tracks {
		n := 0
		for n < len(tr.TimeS) && tr.TimeS[n] <= cut {
			n++
		}
		a := capture.TrackArrays(tr)
		for k := range a {
			if len(a[k]) > 0 {
				a[k] = a[k][:n]
			}
		}
		capture.SetTrackArrays(tr, &a)
	}
	want := unary(t, capt, nil)
	got := replay(t, capt, nil, 0.010, Limits{})
	if len(got.reports) != 1 || got.order[len(got.order)-2] != "swing" {
		t.Fatalf("reports %d, order %v: want the swing just before the summary", len(got.reports), got.order[len(got.order)-3:])
	}
	if countKind(got.events, kinchainv1.EventKind_EVENT_KIND_FINISH) != 0 {
		t.Error("a finish was reported in a stream cut before it")
	}
	compareReports(t, got.reports, want.Swings, exact)
}

// TestLaggingSegment: when one segment's samples arrive late (here the
// pelvis, one second behind), a finished swing waits for them, and is
// analysed anyway once the driver is MaxLag past the window.
func TestLaggingSegment(t *testing.T) {
	capt, _, err := synth.Generate(synth.Config{Segments: sixSegments})
	if err != nil {
		t.Fatal(err)
	}
	want := unary(t, capt, nil)
	h, _ := HeaderFor(capt, nil)
	for _, lag := range []float64{0.3, 2.5} {
		s, err := NewSession(h, Limits{})
		if err != nil {
			t.Fatal(err)
		}
		var batches []*kinchainv1.SampleBatch
		Split(capt, 0.010, func(b *kinchainv1.SampleBatch, _ float64) error {
			batches = append(batches, b)
			return nil
		})
		// Hold the pelvis track of each batch back by lag.
		delay := int(lag / 0.010)
		var held []*kinchainv1.Track
		var reports []*kinchainv1.SwingReport
		for i := 0; i < len(batches)+delay; i++ {
			b := &kinchainv1.SampleBatch{}
			if i < len(batches) {
				for _, tr := range batches[i].Tracks {
					if tr.Segment == kinchainv1.Segment_SEGMENT_PELVIS {
						held = append(held, tr)
					} else {
						b.Tracks = append(b.Tracks, tr)
					}
				}
			}
			if i >= delay && len(held) > 0 {
				b.Tracks = append(b.Tracks, held[0])
				held = held[1:]
			}
			out, err := s.Push(b)
			if err != nil {
				t.Fatal(err)
			}
			for _, r := range out {
				if r.GetSwing() != nil {
					reports = append(reports, r.GetSwing())
				}
			}
		}
		for _, r := range s.Close() {
			if r.GetSwing() != nil {
				reports = append(reports, r.GetSwing())
			}
		}
		if len(reports) != 1 {
			t.Fatalf("lag %g s: %d reports", lag, len(reports))
		}
		if lag < MaxLag {
			// The window was complete when analysed: the same report.
			compareReports(t, reports, want.Swings, exact)
		}
	}
}
