package swing

import (
	"fmt"
	"math"
	"testing"

	"gonum.org/v1/gonum/spatial/r3"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/kinematics"
	"github.com/kinchain/kinchain/internal/synth"
)

// Reference: the synthetic model golfer's truth (closed-form |ω| on a 20 µs
// grid). At 1000 Hz without filtering every segment's peak speed is within
// 0.5 %, its time within one sample, its speed at impact within 0.5 %.
func TestSequenceMatchesTruthUnfiltered(t *testing.T) {
	for _, cfg := range []synth.Config{{}, {Handedness: kinchainv1.Handedness_HANDEDNESS_LEFT, EarlyRelease: true}} {
		c, tr := generate(t, cfg)
		_, reps, _ := pipeline(t, c, noFilter())
		r, st := reps[0], tr.Swings[0]
		if len(r.Sequence) != 10 {
			t.Fatalf("%d sequence rows, want 10", len(r.Sequence))
		}
		imp, _ := eventTime(r, evImpact)
		for i, p := range r.Sequence {
			if p.Segment != synth.AllSegments[i] {
				t.Fatalf("row %d is %v, want proximal-first enum order", i, p.Segment)
			}
			want := st.Peaks[p.Segment]
			closeTo(t, p.Segment.String()+" peak", p.PeakSpeedDegPerS, want.SpeedDegPerS, 0.005*want.SpeedDegPerS)
			closeTo(t, p.Segment.String()+" peak time", p.PeakTimeS, want.TimeS, sample1k)
			closeTo(t, p.Segment.String()+" speed at impact", p.SpeedAtImpactDegPerS, want.SpeedAtImpactDegPerS,
				0.005*want.SpeedAtImpactDegPerS)
			closeTo(t, p.Segment.String()+" time from impact", p.TimeFromImpactMs, (p.PeakTimeS-imp)*1000, 1e-9)
			wantDecel := (want.SpeedDegPerS - want.SpeedAtImpactDegPerS) / want.SpeedDegPerS * 100
			closeTo(t, p.Segment.String()+" deceleration", p.DecelerationPct, wantDecel, 0.5)
		}
	}
}

// With timing jitter, dropouts (shorter than the bridging bound) and mixed
// rates, through the default 20 Hz filter, peak speeds stay within 2 %.
func TestSequenceRobustDefaultFilter(t *testing.T) {
	c, tr := generate(t, synth.Config{Seed: 21, JitterMs: 0.25, Dropouts: 12, DropoutMs: 8,
		SegmentRates: map[kinchainv1.Segment]float64{pelvis: 200, thorax: 250, leadArm: 500, kinchainv1.Segment_SEGMENT_HEAD: 100}})
	_, reps, _ := pipeline(t, c, nil)
	if len(reps) != 1 {
		t.Fatalf("%d swings", len(reps))
	}
	st := tr.Swings[0]
	for _, p := range reps[0].Sequence {
		want := st.Peaks[p.Segment].SpeedDegPerS
		closeTo(t, p.Segment.String()+" peak", p.PeakSpeedDegPerS, want, 0.02*want)
	}
	checkEvents(t, reps[0], st, 3*sample1k)
}

// Facts of the trade (common practice, no source): a swing with a 3:1
// tempo reads 3:1; a proximal-to-distal swing reads proximal_to_distal
// true; a swing whose thorax peaks after the lead arm reads false, with the
// order it has.
func TestSequenceTradeFacts(t *testing.T) {
	c, _ := generate(t, synth.Config{Tempo: 3})
	_, reps, _ := pipeline(t, c, nil)
	r := reps[0]
	closeTo(t, "tempo ratio", r.Tempo.Ratio, 3, 0.1)
	closeTo(t, "tempo ratio", r.Tempo.BackswingS/r.Tempo.DownswingS, r.Tempo.Ratio, 1e-12)
	if !r.ProximalToDistal {
		t.Errorf("proximal-to-distal model reads false, order %v", r.PeakOrder)
	}

	c, tr := generate(t, synth.Config{LateThorax: true})
	_, reps, _ = pipeline(t, c, nil)
	r = reps[0]
	if r.ProximalToDistal {
		t.Error("late-thorax model reads proximal_to_distal true")
	}
	pos := map[kinchainv1.Segment]int{}
	for i, s := range r.PeakOrder {
		pos[s] = i
	}
	if !(pos[leadArm] < pos[thorax]) {
		t.Errorf("late thorax: order %v has the thorax before the lead arm", r.PeakOrder)
	}
	// The chain's order is the truth's (other segments may tie).
	if got, want := chainOrder(r.PeakOrder), chainOrder(tr.Swings[0].PeakOrder); len(got) != 5 || fmt.Sprint(got) != fmt.Sprint(want) {
		t.Errorf("chain peak order %v, truth %v", got, want)
	}
	for i := 1; i < len(r.PeakOrder); i++ {
		if rowOf(r, r.PeakOrder[i]).PeakTimeS < rowOf(r, r.PeakOrder[i-1]).PeakTimeS {
			t.Fatalf("peak_order not by peak time: %v", r.PeakOrder)
		}
	}
}

// Gains compare each adjacent present pair of pelvis → thorax → lead upper
// arm → lead hand → club: ratio distal/proximal and gap, against the truth.
func TestGains(t *testing.T) {
	for _, tc := range []struct {
		segs  []kinchainv1.Segment
		pairs [][2]kinchainv1.Segment
	}{
		{nil, [][2]kinchainv1.Segment{{pelvis, thorax}, {thorax, leadArm}, {leadArm, leadHand}, {leadHand, clubSeg}}},
		{[]kinchainv1.Segment{pelvis, leadArm, clubSeg, leadFore}, [][2]kinchainv1.Segment{{pelvis, leadArm}, {leadArm, clubSeg}}},
	} {
		c, tr := generate(t, synth.Config{Segments: tc.segs})
		_, reps, _ := pipeline(t, c, noFilter())
		g := reps[0].Gains
		if len(g) != len(tc.pairs) {
			t.Fatalf("%d gains, want %d", len(g), len(tc.pairs))
		}
		for i, p := range tc.pairs {
			if g[i].Proximal != p[0] || g[i].Distal != p[1] {
				t.Fatalf("gain %d is %v→%v, want %v→%v", i, g[i].Proximal, g[i].Distal, p[0], p[1])
			}
			a, b := tr.Swings[0].Peaks[p[0]].SpeedDegPerS, tr.Swings[0].Peaks[p[1]].SpeedDegPerS
			closeTo(t, "gain ratio", g[i].Ratio, b/a, 0.01*b/a)
			closeTo(t, "gain gap", g[i].GapDegPerS, b-a, 0.01*b)
			closeTo(t, "gain ratio vs rows", g[i].Ratio,
				rowOf(reps[0], p[1]).PeakSpeedDegPerS/rowOf(reps[0], p[0]).PeakSpeedDegPerS, 1e-12)
		}
	}
}

// The sequence reports the selected speed definition (here the turning
// rate about the world vertical) while detection keeps using |ω|.
// Reference: max |ω·z| of the model over the same window, 0.1 ms scan.
func TestSequenceVerticalSpeed(t *testing.T) {
	c, tr := generate(t, synth.Config{})
	_, reps, _ := pipelineOpt(t, c, kinematics.Options{Cutoff: noFilter(),
		Speed: kinchainv1.SpeedDefinition_SPEED_DEFINITION_VERTICAL})
	if len(reps) != 1 {
		t.Fatalf("%d swings", len(reps))
	}
	st := tr.Swings[0]
	for _, s := range []kinchainv1.Segment{pelvis, thorax, clubSeg} {
		best := 0.0
		for tt := math.Min(st.Top, st.Transitions[s]); tt <= st.Impact+DownswingAfterImpact; tt += 1e-4 {
			best = math.Max(best, math.Abs(r3.Dot(tr.Model.Omega(s, tt), r3.Vec{Z: 1})))
		}
		closeTo(t, s.String()+" vertical peak", rowOf(reps[0], s).PeakSpeedDegPerS, deg(best), 0.005*deg(best))
	}
}

// parabolicPeak finds the vertex of y = 5 − 2(x − 0.3)² from its values at
// −1, 0, 1 (closed form).
func TestParabolicPeak(t *testing.T) {
	y := func(x float64) float64 { return 5 - 2*(x-0.3)*(x-0.3) }
	v, u := parabolicPeak(y(-1), y(0), y(1))
	closeTo(t, "vertex value", v, 5, 1e-12)
	closeTo(t, "vertex offset", u, 0.3, 1e-12)
	if v, u := parabolicPeak(1, 2, 3); v != 2 || u != 0 {
		t.Fatalf("collinear points: %g %g", v, u)
	}
}

// chainOrder keeps the chain segments of an order.
func chainOrder(order []kinchainv1.Segment) []kinchainv1.Segment {
	var out []kinchainv1.Segment
	for _, s := range order {
		for _, c := range chain {
			if s == c {
				out = append(out, s)
			}
		}
	}
	return out
}

// Reference: the window definition (DEVELOPERS.md, "Sequence, gains,
// tempo"): the downswing window reaches DownswingAfterImpact past impact,
// and a swing's report cannot depend on where the sample grid starts, only
// on the samples (the live stream analyses a window of a capture, whose
// grid starts elsewhere). With the club's accelerometer, impact is the
// middle of the shock's sample interval, an exact half sample; the window
// end must then still be the same sample for every grid origin. The head's
// speed is replaced after the top by a ramp that is still rising at the
// window's end, so its peak is the window's last sample: its time must lie
// in [impact + 100 ms, impact + 100 ms + one sample) and be the same,
// relative to impact, for every origin. (Rounding the time impact + 100 ms
// to the nearest sample instead tipped either way with the origin's
// rounding error: 31 of these 40 origins ended the window a sample early,
// 99.5 ms after impact.)
func TestDownswingWindowIndependentOfGridStart(t *testing.T) {
	c, _ := generate(t, synth.Config{IMU: true})
	kin, reps, _ := pipeline(t, c, nil)
	if len(reps) != 1 {
		t.Fatalf("%d swings", len(reps))
	}
	head := kin.Segment(kinchainv1.Segment_SEGMENT_HEAD)
	top, _ := eventTime(reps[0], evTop)
	dt := kin.Grid.Dt()
	from := int(math.Ceil((top - kin.Grid.Start) / dt))
	for i := from; i < len(head.Speed); i++ {
		head.Speed[i] = rad(200) + rad(1)*float64(i-from) // +1 °/s per sample
	}
	var first float64
	for k := 0; k < 40; k++ {
		kin.Grid.Start = float64(k)*0.1234567 + float64(k%7)*1e-3
		reps, _ := Analyze(kin, Options{})
		if len(reps) != 1 {
			t.Fatalf("start %g: %d swings", kin.Grid.Start, len(reps))
		}
		imp, _ := eventTime(reps[0], evImpact)
		u := (imp - kin.Grid.Start) / dt
		if math.Abs(u-math.Floor(u)-0.5) > 1e-6 {
			t.Fatalf("start %g: impact %.6f s is not a half-sample time (no shock refinement?)", kin.Grid.Start, imp)
		}
		p := rowOf(reps[0], kinchainv1.Segment_SEGMENT_HEAD)
		after := p.PeakTimeS - imp
		if after < DownswingAfterImpact-1e-9 || after >= DownswingAfterImpact+dt-1e-9 {
			t.Errorf("start %g: the head's ramp peaks %.4f ms after impact, want the window's end in [%g, %g) ms",
				kin.Grid.Start, 1000*after, 1000*DownswingAfterImpact, 1000*(DownswingAfterImpact+dt))
		}
		if k == 0 {
			first = after
		} else if math.Abs(after-first) > 1e-9 {
			t.Errorf("start %g: window end %.4f ms after impact, %.4f ms with the first origin", kin.Grid.Start, 1000*after, 1000*first)
		}
	}
}
