package condition

import (
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/spatial/r3"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/capture"
	"github.com/kinchain/kinchain/internal/rot"
)

const (
	pelvis = kinchainv1.Segment_SEGMENT_PELVIS
	thorax = kinchainv1.Segment_SEGMENT_THORAX
	club   = kinchainv1.Segment_SEGMENT_CLUB
)

// Reference: closed form. A constant-rate spin about a fixed axis is a
// geodesic of the unit quaternion sphere, so SLERP between any two of its
// samples lies on it: resampling jittered 120 Hz samples onto a 1 kHz grid
// must reproduce q(t) at every grid time to rounding (1e-12 rad), and the
// linearly resampled gyroscope (constant) exactly.
func TestResampleReproducesSpin(t *testing.T) {
	r := rand.New(rand.NewPCG(21, 22))
	for trial := 0; trial < 5; trial++ {
		s := spin{q0: randUnit(r), w: r3.Scale(2+20*r.Float64(), r3.Unit(randVec(r)))}
		ts := times(r, 0.3, 120, 240, 0.2)
		c := &capture.Capture{Tracks: []capture.Track{spinTrack(pelvis, s, ts)}}
		res, err := Run(c, Options{Rate: 1000})
		if err != nil {
			t.Fatal(err)
		}
		g := res.Grid
		if g.Rate != 1000 || g.Start != ts[0] || g.Time(g.N-1) > ts[len(ts)-1]+1e-9 || g.Time(g.N) <= ts[len(ts)-1] {
			t.Fatalf("grid %+v does not span %g..%g s", g, ts[0], ts[len(ts)-1])
		}
		seg := res.Segment(pelvis)
		if seg.Valid != nil {
			t.Fatalf("invalid samples on a track without gaps")
		}
		for i := 0; i < g.N; i++ {
			if d := angle(seg.Q[i], s.at(g.Time(i))); d > 1e-12 {
				t.Fatalf("sample %d (t %.4f): %g rad from the spin", i, g.Time(i), d)
			}
			if i > 0 && rot.Dot(seg.Q[i-1], seg.Q[i]) < 0 {
				t.Fatalf("sample %d: hemisphere discontinuity", i)
			}
			if r3.Norm(r3.Sub(seg.Gyro[i], s.w)) > 1e-12 {
				t.Fatalf("gyro %v, want %v", seg.Gyro[i], s.w)
			}
		}
	}
}

// Reference: closed form, as above, for tracks of different rates (1 kHz,
// 240 Hz, 100 Hz) and spans: the grid takes the highest rate and the
// intersection of the spans, and each track reproduces its own spin.
func TestResampleMixedRates(t *testing.T) {
	r := rand.New(rand.NewPCG(23, 24))
	spins := []spin{
		{randUnit(r), r3.Vec{X: 3, Y: -1, Z: 8}},
		{randUnit(r), r3.Vec{X: -5, Y: 0.5, Z: 2}},
		{randUnit(r), r3.Vec{X: 0, Y: 30, Z: -4}},
	}
	c := &capture.Capture{Tracks: []capture.Track{
		spinTrack(pelvis, spins[0], times(r, 0.10, 1000, 2000, 0.05)),
		spinTrack(thorax, spins[1], times(r, 0.00, 240, 500, 0.05)),
		spinTrack(club, spins[2], times(r, 0.25, 100, 180, 0.05)),
	}}
	res, err := Run(c, Options{})
	if err != nil {
		t.Fatal(err)
	}
	g := res.Grid
	if math.Abs(g.Rate-1000)/1000 > 0.01 {
		t.Errorf("grid rate %g, want the highest track rate ≈ 1000 Hz", g.Rate)
	}
	start := c.Tracks[2].Time[0]
	end := math.Min(c.Tracks[0].Time[1999], math.Min(c.Tracks[1].Time[499], c.Tracks[2].Time[179]))
	if g.Start != start || g.Time(g.N-1) > end+1e-9 || g.Time(g.N) <= end {
		t.Errorf("grid %v..%v, want the intersection %v..%v", g.Start, g.Time(g.N-1), start, end)
	}
	for k, s := range spins {
		seg := &res.Segments[k]
		for i := 0; i < g.N; i++ {
			if d := angle(seg.Q[i], s.at(g.Time(i))); d > 1e-11 {
				t.Fatalf("%s sample %d: %g rad from the spin", seg.Segment, i, d)
			}
		}
		if got, want := seg.SourceRate, []float64{1000, 240, 100}[k]; math.Abs(got-want)/want > 0.02 {
			t.Errorf("%s: source rate %g, want ≈ %g", seg.Segment, got, want)
		}
	}
	if hasWarning(res.Warnings, kinchainv1.WarningCode_WARNING_CODE_LOW_RATE, club) == nil {
		t.Errorf("no LOW_RATE warning for the 100 Hz track on a 1 kHz grid")
	}
	if hasWarning(res.Warnings, kinchainv1.WarningCode_WARNING_CODE_LOW_RATE, pelvis) != nil {
		t.Errorf("LOW_RATE warning for the 1 kHz track")
	}
}

// Reference: the gap rule (max(3 × median interval, 10 ms), see GapBound):
// at 1 kHz a 60 ms hole is a gap, a 3 ms dropout is bridged.
func TestResampleGaps(t *testing.T) {
	r := rand.New(rand.NewPCG(25, 26))
	s := spin{randUnit(r), r3.Vec{X: 1, Y: 2, Z: 3}}
	all := times(r, 0, 1000, 2000, 0)
	var ts []float64
	for i, x := range all {
		if (i > 500 && i < 503) || (i > 1000 && i < 1060) {
			continue
		}
		ts = append(ts, x)
	}
	c := &capture.Capture{Tracks: []capture.Track{spinTrack(pelvis, s, ts)}}
	res, err := Run(c, Options{})
	if err != nil {
		t.Fatal(err)
	}
	q := res.Segments[0].Quality
	if q.GetGaps() != 1 || math.Abs(q.GetLongestGapMs()-60) > 1e-6 {
		t.Errorf("gaps %d, longest %g ms; want 1 gap of 60 ms", q.GetGaps(), q.GetLongestGapMs())
	}
	w := hasWarning(res.Warnings, kinchainv1.WarningCode_WARNING_CODE_GAP_NOT_BRIDGED, pelvis)
	if w == nil || w.TimeS == nil || math.Abs(w.GetTimeS()-1.0) > 1e-9 {
		t.Fatalf("gap warning %v, want one at 1.000 s", w)
	}
	seg := res.Segment(pelvis)
	g := res.Grid
	for i := 0; i < g.N; i++ {
		tt := g.Time(i)
		inside := tt > 1.0+1e-9 && tt < 1.06-1e-9
		if seg.Valid == nil || seg.Valid[i] == inside {
			t.Fatalf("t %.4f: valid %v, inside the gap %v", tt, seg.Valid != nil && seg.Valid[i], inside)
		}
		want := s.at(tt)
		if inside {
			// Nearest valid sample: the gap's start for its first half
			// (grid samples 1001..1030; 1030 is a tie, which goes to the
			// earlier one), its end for the rest.
			want = s.at(1.0)
			if i > 1030 {
				want = s.at(1.06)
			}
		}
		if d := angle(seg.Q[i], want); d > 1e-11 {
			t.Fatalf("t %.4f: %g rad from the expected orientation", tt, d)
		}
	}
	// The same capture with a 100 ms bound bridges the hole.
	res, err = Run(c, Options{MaxGap: 0.1})
	if err != nil {
		t.Fatal(err)
	}
	if res.Segments[0].Valid != nil || res.Segments[0].Quality.GetGaps() != 0 {
		t.Errorf("MaxGap 100 ms: gap not bridged")
	}
}
