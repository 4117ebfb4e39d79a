package plot

import (
	"context"
	"math"
	"testing"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/engine"
	"github.com/kinchain/kinchain/internal/synth"
)

// TestSyntheticGolfer draws the model golfer through the real engine and
// checks the picture against the generator's ground truth (synth.Truth),
// which is computed from the model, not by the analysis: each event inside
// the plotted window has its marker, on the axis read back from the
// picture's own tick labels, at its true time relative to the true impact
// (within the stated tolerance), and each chain link's peak dot sits at its
// true peak time.
func TestSyntheticGolfer(t *testing.T) {
	capt, truth, err := synth.Generate(synth.Config{})
	if err != nil {
		t.Fatal(err)
	}
	resp, err := engine.New(engine.Config{}).Analyze(context.Background(), &kinchainv1.AnalyzeCaptureRequest{
		Capture: capt, Options: &kinchainv1.AnalysisOptions{IncludeSeries: true},
	})
	if err != nil {
		t.Fatal(err)
	}
	if len(resp.Swings) != len(truth.Swings) || len(truth.Swings) == 0 {
		t.Fatalf("%d swings analysed, truth has %d", len(resp.Swings), len(truth.Swings))
	}
	b, err := Render(resp, 0, Options{})
	if err != nil {
		t.Fatal(err)
	}
	writeArtifact(t, "synth.svg", b)
	d := parseSVG(t, b)
	ax, span := axisMap(t, d, "time from impact (ms)")
	v, err := newView(resp, 0, Options{})
	if err != nil {
		t.Fatal(err)
	}

	var lines []float64
	for _, p := range d.Paths {
		if x, ok := p.vertical(); ok && p.Stroke == hex(inkEvent) && p.Dashed {
			if lo, hi := p.yRange(); lo >= span[0]-0.01 && hi <= span[1]+0.01 {
				lines = append(lines, x)
			}
		}
	}
	detected := map[kinchainv1.EventKind]float64{}
	for _, e := range resp.Swings[0].Events {
		if _, dup := detected[e.Kind]; !dup {
			detected[e.Kind] = (e.TimeS - v.impactS) * 1000
		}
	}

	tr := truth.Swings[0]
	// Tolerances, ms, of the detected events against the truth (ours: the
	// start and end of motion are found by a speed threshold, so address,
	// takeaway and finish are looser than the reversal and crossing events).
	events := []struct {
		kind kinchainv1.EventKind
		t    float64
		tol  float64
	}{
		{kinchainv1.EventKind_EVENT_KIND_ADDRESS, tr.Address, 40},
		{kinchainv1.EventKind_EVENT_KIND_TAKEAWAY, tr.Takeaway, 40},
		{kinchainv1.EventKind_EVENT_KIND_LEAD_ARM_LEVEL_BACKSWING, tr.LeadArmLevelBackswing, 10},
		{kinchainv1.EventKind_EVENT_KIND_TOP, tr.Top, 10},
		{kinchainv1.EventKind_EVENT_KIND_LEAD_ARM_LEVEL_DOWNSWING, tr.LeadArmLevelDownswing, 10},
		{kinchainv1.EventKind_EVENT_KIND_IMPACT, tr.Impact, 10},
		{kinchainv1.EventKind_EVENT_KIND_FINISH, tr.Finish, 60},
	}
	checked := 0
	for _, e := range events {
		name := eventName(e.kind)
		truthMs := (e.t - tr.Impact) * 1000
		det, ok := detected[e.kind]
		if !ok {
			t.Errorf("%s: not detected (truth %.0f ms from impact)", name, truthMs)
			continue
		}
		// The marker is at the detected time, ...
		x := ax.at(det)
		inWindow := det >= v.fromMs && det <= v.toMs
		if inWindow != hasLineAt(lines, x) {
			t.Errorf("%s at %.1f ms: in window %v, marker drawn %v", name, det, inWindow, hasLineAt(lines, x))
		}
		if !inWindow {
			continue
		}
		checked++
		// ... which is the true time relative to the true impact.
		if d := det - truthMs; math.Abs(d) > e.tol {
			t.Errorf("%s: marker at %.1f ms from impact, truth %.1f ms (%.1f ms off, tolerance %.0f)", name, det, truthMs, d, e.tol)
		}
	}
	if checked < 6 {
		t.Errorf("only %d events inside the window %.0f..%.0f ms", checked, v.fromMs, v.toMs)
	}

	// Peak dots of the chain links at the true peak times (tolerance 5 ms,
	// ours).
	for _, s := range chain {
		pk, ok := tr.Peaks[s]
		if !ok {
			continue
		}
		x := ax.at((pk.TimeS - tr.Impact) * 1000)
		best := math.Inf(1)
		for _, p := range d.Paths {
			if p.Arc && p.Fill == hex(styleOf(s).Color) && p.centre().Y > span[0] {
				if dx := p.centre().X - x; math.Abs(dx) < math.Abs(best) {
					best = dx
				}
			}
		}
		if ms := best / ax.B; math.Abs(ms) > 5 {
			t.Errorf("%s: peak dot %.1f ms from the true peak time", segmentName(s), ms)
		}
	}
}

// BenchmarkSyntheticGolfer measures, side by side in one run, what the plot
// endpoint spends on the model golfer: the analysis (with series) and the
// drawing in each format.
func BenchmarkSyntheticGolfer(b *testing.B) {
	capt, _, err := synth.Generate(synth.Config{})
	if err != nil {
		b.Fatal(err)
	}
	eng := engine.New(engine.Config{})
	req := &kinchainv1.AnalyzeCaptureRequest{Capture: capt, Options: &kinchainv1.AnalysisOptions{IncludeSeries: true}}
	resp, err := eng.Analyze(context.Background(), req)
	if err != nil {
		b.Fatal(err)
	}
	b.Run("analyze", func(b *testing.B) {
		for b.Loop() {
			if _, err := eng.Analyze(context.Background(), req); err != nil {
				b.Fatal(err)
			}
		}
	})
	for _, f := range []Format{FormatSVG, FormatPNG} {
		b.Run("render-"+string(f), func(b *testing.B) {
			for b.Loop() {
				if _, err := Render(resp, 0, Options{Format: f}); err != nil {
					b.Fatal(err)
				}
			}
		})
	}
}
