package stream

import (
	"runtime"
	"testing"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/synth"
)

// TestMemoryBounded pushes a long 1 kHz six-segment stream (10 minutes;
// 1 minute with -short) through one session: the model golfer's three
// swings with a waggle and a half swing, 20 s of stream, replayed over and
// over with its times moved on. The rings must stop at their capacity, the
// other state must not grow, the heap must stay flat after the first
// cycle, and every swing must still be reported.
func TestMemoryBounded(t *testing.T) {
	minutes := 10.0
	if testing.Short() {
		minutes = 1
	}
	capt, _, err := synth.Generate(synth.Config{Segments: sixSegments, Swings: 3, Waggles: 1, HalfSwings: 1, Duration: 20})
	if err != nil {
		t.Fatal(err)
	}
	h, err := HeaderFor(capt, nil)
	if err != nil {
		t.Fatal(err)
	}
	var batches []*kinchainv1.SampleBatch
	if err := Split(capt, 0.020, func(b *kinchainv1.SampleBatch, _ float64) error {
		batches = append(batches, b)
		return nil
	}); err != nil {
		t.Fatal(err)
	}
	ts := capt.GetTracks()[0].GetTimeS()
	span := ts[len(ts)-1] - ts[0] + (ts[1] - ts[0])
	cycles := int(minutes * 60 / span)

	s, err := NewSession(h, Limits{})
	if err != nil {
		t.Fatal(err)
	}
	lim := s.lim.ringCapacity(s.rate)
	var ms runtime.MemStats
	var heapAfterFirst uint64
	var bytesAfterFirst int
	reports := 0
	for c := 0; c < cycles; c++ {
		for _, b := range batches {
			out, err := s.Push(b)
			if err != nil {
				t.Fatalf("cycle %d: %v", c, err)
			}
			for _, r := range out {
				if r.GetSwing() != nil {
					reports++
				}
			}
		}
		for _, st := range s.segs {
			if st.ring.size() > lim || st.ring.n > lim {
				t.Fatalf("cycle %d: %s ring holds %d of %d allocated, limit %d", c, st.name, st.ring.n, st.ring.size(), lim)
			}
			if st.neutral != nil {
				t.Fatalf("cycle %d: neutral samples kept without a neutral window", c)
			}
		}
		if len(s.pend) > maxPending || len(s.warnings) > maxWarnings || len(s.det.out) != 0 {
			t.Fatalf("cycle %d: %d pending, %d warnings, %d undrained decisions", c, len(s.pend), len(s.warnings), len(s.det.out))
		}
		if c == 1 {
			runtime.GC()
			runtime.ReadMemStats(&ms)
			heapAfterFirst = ms.HeapAlloc
			bytesAfterFirst = s.bufferBytes
		}
		if c > 1 && s.bufferBytes != bytesAfterFirst {
			t.Fatalf("cycle %d: buffers grew from %d to %d bytes", c, bytesAfterFirst, s.bufferBytes)
		}
		for _, b := range batches {
			for _, tr := range b.Tracks {
				for k := range tr.TimeS {
					tr.TimeS[k] += span
				}
			}
		}
	}
	runtime.GC()
	runtime.ReadMemStats(&ms)
	// The session's own buffers: six rings of time and quaternion.
	if want := 6 * lim * 8 * 5; s.bufferBytes != want {
		t.Errorf("buffers %d bytes, want %d (six rings of %d samples × 5 arrays)", s.bufferBytes, want, lim)
	}
	if grow := int64(ms.HeapAlloc) - int64(heapAfterFirst); grow > 2<<20 {
		t.Errorf("heap grew by %d bytes over %d cycles after the first two", grow, cycles-2)
	}
	if want := 3 * cycles; reports != want {
		t.Errorf("%d swings reported in %d cycles of 3", reports, cycles)
	}
	sum := s.Close()[0].GetSummary()
	if sum.GetSamples() != int64(cycles*len(ts)*6) {
		t.Errorf("summary counts %d samples, pushed %d", sum.GetSamples(), cycles*len(ts)*6)
	}
	t.Logf("%.0f s of stream, %d swings; buffers %d bytes; heap %d bytes after cycle 2, %d at the end",
		float64(cycles)*span, reports, s.bufferBytes, heapAfterFirst, ms.HeapAlloc)
}
