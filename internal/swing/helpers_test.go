package swing

import (
	"math"
	"testing"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/condition"
	"github.com/kinchain/kinchain/internal/kinematics"
	"github.com/kinchain/kinchain/internal/synth"
	"github.com/kinchain/kinchain/internal/validate"
)

// pipeline runs the real stages on a capture: validate → condition →
// kinematics (cutoff: nil for the default, else that value; 0 = no
// filter) → Analyze.
func pipeline(t testing.TB, c *kinchainv1.Capture, cutoff *float64) (*kinematics.Result, []*kinchainv1.SwingReport, []*kinchainv1.Warning) {
	t.Helper()
	return pipelineOpt(t, c, kinematics.Options{Cutoff: cutoff})
}

// pipelineOpt is pipeline with explicit kinematics options.
func pipelineOpt(t testing.TB, c *kinchainv1.Capture, ko kinematics.Options) (*kinematics.Result, []*kinchainv1.SwingReport, []*kinchainv1.Warning) {
	t.Helper()
	cc, err := validate.Capture(c, validate.Limits{}, nil)
	if err != nil {
		t.Fatalf("validate: %v", err)
	}
	cond, err := condition.Run(cc, condition.Options{})
	if err != nil {
		t.Fatalf("condition: %v", err)
	}
	kin, err := kinematics.Compute(cond, ko)
	if err != nil {
		t.Fatalf("kinematics: %v", err)
	}
	opt := Options{Handedness: cc.Handedness, TargetHeading: cc.TargetHeading}
	reps, warns := Analyze(kin, opt)
	return kin, reps, warns
}

func noFilter() *float64 { z := 0.0; return &z }

// generate calls synth.Generate and fails the test on error.
func generate(t testing.TB, cfg synth.Config) (*kinchainv1.Capture, *synth.Truth) {
	t.Helper()
	c, tr, err := synth.Generate(cfg)
	if err != nil {
		t.Fatal(err)
	}
	return c, tr
}

func eventTime(r *kinchainv1.SwingReport, k kinchainv1.EventKind) (float64, bool) {
	for _, e := range r.Events {
		if e.Kind == k {
			return e.TimeS, true
		}
	}
	return math.NaN(), false
}

// closeTo fails the test when got is farther than tol from want.
func closeTo(t *testing.T, what string, got, want, tol float64) {
	t.Helper()
	if !(math.Abs(got-want) <= tol) {
		t.Errorf("%s = %.6g, want %.6g ± %.3g", what, got, want, tol)
	}
}

// rowOf returns the sequence row of segment s, or nil.
func rowOf(r *kinchainv1.SwingReport, s kinchainv1.Segment) *kinchainv1.SegmentPeak {
	for _, p := range r.Sequence {
		if p.Segment == s {
			return p
		}
	}
	return nil
}

// transitionOf returns the transition time of segment s.
func transitionOf(r *kinchainv1.SwingReport, s kinchainv1.Segment) (float64, bool) {
	for _, x := range r.Transitions {
		if x.Segment == s {
			return x.TimeS, true
		}
	}
	return math.NaN(), false
}

// warningsOf returns the warnings with code c.
func warningsOf(ws []*kinchainv1.Warning, c kinchainv1.WarningCode) []*kinchainv1.Warning {
	var out []*kinchainv1.Warning
	for _, w := range ws {
		if w.Code == c {
			out = append(out, w)
		}
	}
	return out
}

// Event kind shorthands.
const (
	evAddress  = kinchainv1.EventKind_EVENT_KIND_ADDRESS
	evTakeaway = kinchainv1.EventKind_EVENT_KIND_TAKEAWAY
	evLevelBS  = kinchainv1.EventKind_EVENT_KIND_LEAD_ARM_LEVEL_BACKSWING
	evTop      = kinchainv1.EventKind_EVENT_KIND_TOP
	evLevelDS  = kinchainv1.EventKind_EVENT_KIND_LEAD_ARM_LEVEL_DOWNSWING
	evImpact   = kinchainv1.EventKind_EVENT_KIND_IMPACT
	evFinish   = kinchainv1.EventKind_EVENT_KIND_FINISH
)
