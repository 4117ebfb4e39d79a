package validate_test

import (
	"errors"
	"math"
	"testing"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/validate"
)

func TestOptions(t *testing.T) {
	f := func(v float64) *float64 { return &v }
	cases := []struct {
		name  string
		o     *kinchainv1.AnalysisOptions
		lim   validate.Limits
		field string // "" for valid options
	}{
		{"nil", nil, validate.Limits{}, ""},
		{"zero", &kinchainv1.AnalysisOptions{}, validate.Limits{}, ""},
		{"typical", &kinchainv1.AnalysisOptions{CutoffHz: f(12), FilterOrder: 4, RateHz: 200, Speed: kinchainv1.SpeedDefinition_SPEED_DEFINITION_LONG_AXIS, Neutral: &kinchainv1.TimeWindow{StartS: 0, EndS: 1}}, validate.Limits{}, ""},
		{"cutoff 0 turns filtering off", &kinchainv1.AnalysisOptions{CutoffHz: f(0)}, validate.Limits{}, ""},
		{"order 8", &kinchainv1.AnalysisOptions{FilterOrder: 8}, validate.Limits{}, ""},
		{"rate at the bounds", &kinchainv1.AnalysisOptions{RateHz: 20}, validate.Limits{}, ""},
		{"cutoff negative", &kinchainv1.AnalysisOptions{CutoffHz: f(-1)}, validate.Limits{}, "options.cutoff_hz"},
		{"cutoff NaN", &kinchainv1.AnalysisOptions{CutoffHz: f(math.NaN())}, validate.Limits{}, "options.cutoff_hz"},
		{"cutoff Inf", &kinchainv1.AnalysisOptions{CutoffHz: f(math.Inf(1))}, validate.Limits{}, "options.cutoff_hz"},
		{"order 9", &kinchainv1.AnalysisOptions{FilterOrder: 9}, validate.Limits{}, "options.filter_order"},
		{"order -1", &kinchainv1.AnalysisOptions{FilterOrder: -1}, validate.Limits{}, "options.filter_order"},
		{"rate too low", &kinchainv1.AnalysisOptions{RateHz: 19.9}, validate.Limits{}, "options.rate_hz"},
		{"rate negative", &kinchainv1.AnalysisOptions{RateHz: -100}, validate.Limits{}, "options.rate_hz"},
		{"rate NaN", &kinchainv1.AnalysisOptions{RateHz: math.NaN()}, validate.Limits{}, "options.rate_hz"},
		{"rate above a lowered limit", &kinchainv1.AnalysisOptions{RateHz: 600}, validate.Limits{MaxRate: 500}, "options.rate_hz"},
		{"speed", &kinchainv1.AnalysisOptions{Speed: 4}, validate.Limits{}, "options.speed"},
		{"angular velocity source", &kinchainv1.AnalysisOptions{AngularVelocitySource: 3}, validate.Limits{}, "options.angular_velocity_source"},
		{"orientation source", &kinchainv1.AnalysisOptions{OrientationSource: -1}, validate.Limits{}, "options.orientation_source"},
		{"handedness", &kinchainv1.AnalysisOptions{Handedness: 3}, validate.Limits{}, "options.handedness"},
		{"neutral reversed", &kinchainv1.AnalysisOptions{Neutral: &kinchainv1.TimeWindow{StartS: 2, EndS: 1}}, validate.Limits{}, "options.neutral"},
		{"neutral NaN", &kinchainv1.AnalysisOptions{Neutral: &kinchainv1.TimeWindow{StartS: 0, EndS: math.NaN()}}, validate.Limits{}, "options.neutral.end_s"},
		{"sensor ranges", &kinchainv1.AnalysisOptions{GyroRangeDps: 4000, AccelRangeG: 200}, validate.Limits{}, ""},
		{"gyro range negative", &kinchainv1.AnalysisOptions{GyroRangeDps: -2000}, validate.Limits{}, "options.gyro_range_dps"},
		{"gyro range Inf", &kinchainv1.AnalysisOptions{GyroRangeDps: math.Inf(1)}, validate.Limits{}, "options.gyro_range_dps"},
		{"accel range NaN", &kinchainv1.AnalysisOptions{AccelRangeG: math.NaN()}, validate.Limits{}, "options.accel_range_g"},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			err := validate.OptionsWithin(tc.o, tc.lim)
			if tc.lim == (validate.Limits{}) {
				if e2 := validate.Options(tc.o); (e2 == nil) != (err == nil) {
					t.Errorf("Options and OptionsWithin disagree: %v, %v", e2, err)
				}
			}
			if tc.field == "" {
				if err != nil {
					t.Fatalf("unexpected error %v", err)
				}
				return
			}
			var e *validate.Error
			if !errors.As(err, &e) {
				t.Fatalf("got %v, want a *validate.Error", err)
			}
			if e.Field != tc.field || e.Reason != validate.ReasonBadOption || e.Sample != -1 {
				t.Errorf("got %q %s %d (%v), want %q bad_option", e.Field, e.Reason, e.Sample, err, tc.field)
			}
		})
	}
}

func TestRequest(t *testing.T) {
	req := &kinchainv1.AnalyzeCaptureRequest{Capture: good(), Options: &kinchainv1.AnalysisOptions{Neutral: &kinchainv1.TimeWindow{StartS: 0, EndS: 0.1}}}
	if _, err := validate.Request(req, validate.Limits{}, nil); err != nil {
		t.Fatalf("valid request: %v", err)
	}
	check := func(name string, r *kinchainv1.AnalyzeCaptureRequest, field string, reason validate.Reason) {
		t.Helper()
		_, err := validate.Request(r, validate.Limits{}, nil)
		var e *validate.Error
		if !errors.As(err, &e) || e.Field != field || e.Reason != reason {
			t.Errorf("%s: got %v, want %s %s", name, err, field, reason)
		}
	}
	check("no capture", &kinchainv1.AnalyzeCaptureRequest{}, "capture", validate.ReasonMissingField)
	c := good()
	c.Tracks[0].Qx[4] = math.NaN()
	check("capture error", &kinchainv1.AnalyzeCaptureRequest{Capture: c}, "capture.tracks[0].qx", validate.ReasonNonFinite)
	check("options error", &kinchainv1.AnalyzeCaptureRequest{Capture: good(), Options: &kinchainv1.AnalysisOptions{FilterOrder: 12}}, "options.filter_order", validate.ReasonBadOption)
	// The samples run 0 to 0.19 s.
	check("options.neutral outside", &kinchainv1.AnalyzeCaptureRequest{Capture: good(), Options: &kinchainv1.AnalysisOptions{Neutral: &kinchainv1.TimeWindow{StartS: 0.1, EndS: 0.5}}}, "options.neutral.end_s", validate.ReasonBadOption)
}
