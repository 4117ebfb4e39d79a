package stream

import (
	"testing"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/bvh/bvhtest"
	"github.com/kinchain/kinchain/internal/synth"
)

// The streamed reports are checked against the unary analysis of the same
// capture (AnalyzeCapture through engine.Analyze): the reference outside
// this package. Where the window sees exactly the samples the unary
// analysis sees, they must agree to rounding (exact); where the analysis
// depends on the span it is given (the still level taken from the quietest
// stretch, fusion started at the window), DEVELOPERS.md ("Which test
// checks what", Live streams) states the tolerance and why, and these tests
// enforce it.

// TestStreamMatchesUnarySynthetic covers the model golfer in the
// configurations whose window analysis must equal the unary one.
func TestStreamMatchesUnarySynthetic(t *testing.T) {
	left := kinchainv1.Handedness_HANDEDNESS_LEFT
	cases := []struct {
		name   string
		cfg    synth.Config
		opts   *kinchainv1.AnalysisOptions
		swings int
	}{
		{"one swing", synth.Config{}, nil, 1},
		{"three swings with waggles and a half swing", synth.Config{Swings: 3, Waggles: 2, HalfSwings: 1, SwingVariation: 0.05, Seed: 7}, nil, 3},
		{"left-handed", synth.Config{Handedness: left, Swings: 2}, nil, 2},
		{"mountings in the header", synth.Config{MountingDeg: 25, Seed: 4}, nil, 1},
		{"target heading", synth.Config{TargetHeadingDeg: 70, RecordTargetHeading: true}, nil, 1},
		{"120 Hz, six segments", synth.Config{Rate: 120, Segments: sixSegments}, nil, 1},
		{"neutral-pose calibration", synth.Config{MountingDeg: 30, Seed: 9}, &kinchainv1.AnalysisOptions{
			Neutral: &kinchainv1.TimeWindow{StartS: 0.1, EndS: 0.8}}, 1},
		{"vertical speed, no filter", synth.Config{}, &kinchainv1.AnalysisOptions{
			Speed: kinchainv1.SpeedDefinition_SPEED_DEFINITION_VERTICAL, CutoffHz: new(0.0)}, 1},
		{"dropouts", synth.Config{Dropouts: 5, Swings: 2, Seed: 3}, nil, 2},
		{"mixed rates", synth.Config{Swings: 2, SegmentRates: map[kinchainv1.Segment]float64{
			kinchainv1.Segment_SEGMENT_PELVIS: 200, kinchainv1.Segment_SEGMENT_HEAD: 100}}, nil, 2},
		{"hemisphere flips", synth.Config{HemisphereFlips: true, Swings: 2, Seed: 8}, nil, 2},
		// Without noise residual analysis finds nothing to remove in the
		// window or in the capture: both choose kinematics.ResidualMaxCutoff.
		{"residual cutoff, no noise", synth.Config{Swings: 2}, &kinchainv1.AnalysisOptions{ResidualCutoff: true}, 2},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			capt, _, err := synth.Generate(c.cfg)
			if err != nil {
				t.Fatal(err)
			}
			if c.name == "neutral-pose calibration" {
				// The header carries no mountings: calibrate from the window.
				for _, tr := range capt.Tracks {
					tr.Mounting = nil
				}
			}
			want := unary(t, capt, c.opts)
			if len(want.Swings) != c.swings {
				t.Fatalf("unary analysis found %d swings, the model has %d", len(want.Swings), c.swings)
			}
			got := replay(t, capt, c.opts, 0.010, Limits{})
			d := compareReports(t, got.reports, want.Swings, exact)
			t.Logf("largest differences: %v", d)
			if n := got.summary.GetSwings(); int(n) != c.swings {
				t.Errorf("summary counts %d swings, want %d", n, c.swings)
			}
		})
	}
}

// TestStreamMatchesUnaryImpactShock: the club accelerometer case. Impact is
// then moved to the middle of the sample interval of the ball-strike shock,
// a half-sample time; the swing package counts the downswing window's end
// in whole samples from the impact sample (not by rounding the time
// impact + 100 ms, an exact half that the window's grid origin could tip
// either way), so the window analysis must equal the unary one exactly.
func TestStreamMatchesUnaryImpactShock(t *testing.T) {
	capt, _, err := synth.Generate(synth.Config{IMU: true, Swings: 2})
	if err != nil {
		t.Fatal(err)
	}
	want := unary(t, capt, nil)
	if len(want.Swings) != 2 {
		t.Fatalf("unary analysis found %d swings, the model has 2", len(want.Swings))
	}
	got := replay(t, capt, nil, 0.010, Limits{})
	d := compareReports(t, got.reports, want.Swings, exact)
	t.Logf("largest differences: %v", d)
}

// TestStreamMatchesUnaryWithinTolerance covers data for which the window
// analysis legitimately differs from the unary one, with the tolerances
// DEVELOPERS.md states ("Which test checks what", Live streams):
//
//   - orientation noise: the still and onset levels come from the quietest
//     QuietWindow of the span analysed (swing package), so a window and the
//     whole capture can put the address and takeaway a sample or two apart;
//     the posture at such an event is then read a sample or two away, in
//     data with σ of noise per sample;
//   - timing jitter: the common grid's rate is 1/median interval of the
//     span analysed, so the window's grid is a hair off the capture's;
//   - fusion: raw inertial tracks are fused from the start of the window,
//     not of the capture, so the orientation filter starts from another
//     state (without a magnetometer the heading then differs freely);
//   - residual analysis (options.residual_cutoff) in noisy data: each
//     segment's cutoff is chosen from the data of the span analysed, so the
//     window's cutoffs differ a little from the capture's (both lie in the
//     5–25 Hz the analysis picks at this noise level), and with them the
//     filtered speeds and the levels taken from them.
func TestStreamMatchesUnaryWithinTolerance(t *testing.T) {
	cases := []struct {
		name  string
		cfg   synth.Config
		opts  *kinchainv1.AnalysisOptions
		seeds int
		tol   tolerance
	}{
		{"orientation noise 0.2°", synth.Config{NoiseDeg: 0.2, Swings: 2}, nil, 3,
			tolerance{timeS: 0.010, deg: 1.5, speedRel: 0.005, ratioRel: 0.015, pctPoints: 0.5}},
		{"timing jitter 0.1 ms", synth.Config{JitterMs: 0.1, Swings: 2}, nil, 2,
			tolerance{timeS: 0.002, deg: 0.05, speedRel: 0.002, ratioRel: 0.001, pctPoints: 0.1}},
		{"raw IMU, 9D fusion", synth.Config{IMU: true, OmitQuaternions: true, Magnetometer: true, Swings: 2}, nil, 1,
			tolerance{timeS: 0.002, deg: 1.5, speedRel: 0.002, ratioRel: 0.002, pctPoints: 0.2}},
		{"raw IMU, 6D fusion", synth.Config{IMU: true, OmitQuaternions: true, Swings: 2},
			&kinchainv1.AnalysisOptions{FusionIgnoreMagnetometer: true}, 1,
			tolerance{timeS: 0.002, deg: 10, speedRel: 0.002, ratioRel: 0.002, pctPoints: 0.2}},
		{"residual cutoff, orientation noise 0.2°", synth.Config{NoiseDeg: 0.2, Swings: 2},
			&kinchainv1.AnalysisOptions{ResidualCutoff: true}, 3,
			tolerance{timeS: 0.010, deg: 2, speedRel: 0.01, ratioRel: 0.015, pctPoints: 0.5}},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			var worst diff
			seeds := c.seeds
			if testing.Short() {
				seeds = 1
			}
			for seed := 1; seed <= seeds; seed++ {
				cfg := c.cfg
				cfg.Seed = int64(seed)
				capt, _, err := synth.Generate(cfg)
				if err != nil {
					t.Fatal(err)
				}
				want := unary(t, capt, c.opts)
				if len(want.Swings) != cfg.Swings {
					t.Fatalf("seed %d: unary analysis found %d swings, the model has %d", seed, len(want.Swings), cfg.Swings)
				}
				got := replay(t, capt, c.opts, 0.010, Limits{})
				worst.max(compareReports(t, got.reports, want.Swings, c.tol))
			}
			t.Logf("largest differences over %d seeds: %v", seeds, worst)
		})
	}
}

// TestStreamMatchesUnaryCMU streams the CMU golf swings (open optical
// motion capture of a real golfer, 120 Hz, no club: the lead hand drives
// detection) and compares with the unary analysis of the same file.
func TestStreamMatchesUnaryCMU(t *testing.T) {
	for _, trial := range bvhtest.Trials {
		t.Run(trial, func(t *testing.T) {
			capt := bvhtest.Capture(t, trial)
			want := unary(t, capt, nil)
			got := replay(t, capt, nil, 0.050, Limits{})
			var impacts int
			for _, e := range got.events {
				if e.GetEvent().GetKind() == kinchainv1.EventKind_EVENT_KIND_IMPACT {
					impacts++
				}
			}
			if impacts != 1 {
				t.Errorf("the live detector reported %d impacts in one swing", impacts)
			}
			if len(want.Swings) != 1 {
				t.Fatalf("unary analysis found %d swings in one swing (warnings %v)", len(want.Swings), want.GetQuality().GetWarnings())
			}
			d := compareReports(t, got.reports, want.Swings, exact)
			t.Logf("largest differences: %v", d)
		})
	}
}
