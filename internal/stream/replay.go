package stream

import (
	"errors"
	"fmt"
	"math"
	"sort"

	"google.golang.org/protobuf/proto"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/capture"
	"github.com/kinchain/kinchain/internal/validate"
)

// HeaderFor returns the header that announces capture c as a stream: its
// id, handedness, club and target heading, its tracks' segments in track
// order, their mountings (when every track has one), the options (with the
// capture's neutral window moved into options.neutral unless the options
// set one) and, as rate_hz, the highest track rate (validate.Rate: 1/median
// sample interval). Replaying c after this header gives the stream the
// data the unary analysis of c sees.
func HeaderFor(c *kinchainv1.Capture, opts *kinchainv1.AnalysisOptions) (*kinchainv1.StreamHeader, error) {
	if c == nil || len(c.GetTracks()) == 0 {
		return nil, errors.New("stream: a capture without tracks cannot be replayed")
	}
	h := &kinchainv1.StreamHeader{
		CaptureId:  c.GetCaptureId(),
		Handedness: c.GetHandedness(),
		Club:       c.GetClub(),
	}
	if c.TargetHeadingDeg != nil {
		v := c.GetTargetHeadingDeg()
		h.TargetHeadingDeg = &v
	}
	if opts != nil {
		h.Options = proto.Clone(opts).(*kinchainv1.AnalysisOptions)
	}
	if w := c.GetNeutral(); w != nil && h.GetOptions().GetNeutral() == nil {
		if h.Options == nil {
			h.Options = &kinchainv1.AnalysisOptions{}
		}
		h.Options.Neutral = proto.Clone(w).(*kinchainv1.TimeWindow)
	}
	all := true
	for _, t := range c.GetTracks() {
		h.Segments = append(h.Segments, t.GetSegment())
		if t.GetMounting() == nil {
			all = false
		}
		if r, _ := validate.Rate(t.GetTimeS()); r > h.RateHz && !math.IsInf(r, 0) {
			h.RateHz = r
		}
	}
	if all {
		for _, t := range c.GetTracks() {
			h.Mountings = append(h.Mountings, proto.Clone(t.GetMounting()).(*kinchainv1.Quaternion))
		}
	}
	if !(h.RateHz > 0) {
		return nil, errors.New("stream: no track has two samples to give a rate")
	}
	return h, nil
}

// Split cuts capture c into consecutive batches of span s of stream time:
// batch k carries, for every track, the samples with t0 + k·span ≤ time <
// t0 + (k+1)·span, t0 the earliest sample. fn gets each batch that has
// samples and the end of its span (the stream time at which a live source
// would have it complete); an error from fn stops Split and is returned.
// The batches share no memory with c. span must be positive.
func Split(c *kinchainv1.Capture, span float64, fn func(b *kinchainv1.SampleBatch, end float64) error) error {
	if !(span > 0) || math.IsInf(span, 0) {
		return fmt.Errorf("stream: batch span %g s is not positive and finite", span)
	}
	tracks := c.GetTracks()
	t0 := math.Inf(1)
	t1 := math.Inf(-1)
	for _, t := range tracks {
		if ts := t.GetTimeS(); len(ts) > 0 {
			t0 = math.Min(t0, ts[0])
			t1 = math.Max(t1, ts[len(ts)-1])
		}
	}
	if math.IsInf(t0, 1) {
		return nil
	}
	if n := (t1 - t0) / span; n > maxBatches {
		return fmt.Errorf("stream: %g s in batches of %g s would be %.3g batches, more than %d", t1-t0, span, n, maxBatches)
	}
	pos := make([]int, len(tracks))
	for k := 0; ; k++ {
		end := t0 + float64(k+1)*span
		b := &kinchainv1.SampleBatch{}
		for i, t := range tracks {
			ts := t.GetTimeS()
			lo := pos[i]
			hi := lo + sort.Search(len(ts)-lo, func(j int) bool { return ts[lo+j] >= end })
			if hi == lo {
				continue
			}
			pos[i] = hi
			b.Tracks = append(b.Tracks, slice(t, lo, hi))
		}
		if len(b.Tracks) > 0 {
			if err := fn(b, end); err != nil {
				return err
			}
		}
		if end > t1 {
			return nil
		}
	}
}

// maxBatches bounds the batches Split makes.
const maxBatches = 100_000_000

// slice returns samples [lo, hi) of t as a new track without mounting.
func slice(t *kinchainv1.Track, lo, hi int) *kinchainv1.Track {
	a := capture.TrackArrays(t)
	var out [capture.NumArrays][]float64
	for k := range a {
		if len(a[k]) > 0 {
			out[k] = append([]float64(nil), a[k][lo:hi]...)
		}
	}
	tr := &kinchainv1.Track{Segment: t.GetSegment()}
	capture.SetTrackArrays(tr, &out)
	return tr
}
