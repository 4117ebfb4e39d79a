package server_test

import (
	"net/url"
	"testing"

	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"
	"google.golang.org/protobuf/proto"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/server"
)

func TestQueryOptions(t *testing.T) {
	f := func(v float64) *float64 { return &v }
	cases := []struct {
		query string
		want  *kinchainv1.AnalysisOptions
	}{
		{"", &kinchainv1.AnalysisOptions{}},
		{"cutoff_hz=10&speed=vertical&include_series=true&handedness=left", &kinchainv1.AnalysisOptions{
			CutoffHz: f(10), Speed: kinchainv1.SpeedDefinition_SPEED_DEFINITION_VERTICAL, IncludeSeries: true, Handedness: kinchainv1.Handedness_HANDEDNESS_LEFT}},
		// Explicit zero cutoff (no filtering) is kept as set.
		{"cutoff_hz=0", &kinchainv1.AnalysisOptions{CutoffHz: f(0)}},
		// JSON names, full enum names, hyphens, numbers.
		{"cutoffHz=5&speed=SPEED_DEFINITION_LONG_AXIS&filterOrder=4", &kinchainv1.AnalysisOptions{CutoffHz: f(5), Speed: kinchainv1.SpeedDefinition_SPEED_DEFINITION_LONG_AXIS, FilterOrder: 4}},
		{"speed=long-axis&angular_velocity_source=gyroscope&orientation_source=FUSION", &kinchainv1.AnalysisOptions{
			Speed: kinchainv1.SpeedDefinition_SPEED_DEFINITION_LONG_AXIS, AngularVelocitySource: kinchainv1.AngularVelocitySource_ANGULAR_VELOCITY_SOURCE_GYROSCOPE,
			OrientationSource: kinchainv1.OrientationSource_ORIENTATION_SOURCE_FUSION}},
		{"speed=2&handedness=Right", &kinchainv1.AnalysisOptions{Speed: kinchainv1.SpeedDefinition_SPEED_DEFINITION_VERTICAL, Handedness: kinchainv1.Handedness_HANDEDNESS_RIGHT}},
		{"neutral.start_s=0.1&neutral.end_s=0.9&rate_hz=200&residual_cutoff=true&fusion_ignore_magnetometer=true", &kinchainv1.AnalysisOptions{
			Neutral: &kinchainv1.TimeWindow{StartS: 0.1, EndS: 0.9}, RateHz: 200, ResidualCutoff: true, FusionIgnoreMagnetometer: true}},
		{"neutral=0.2:1.5", &kinchainv1.AnalysisOptions{Neutral: &kinchainv1.TimeWindow{StartS: 0.2, EndS: 1.5}}},
		{"gyro_range_dps=4000&accelRangeG=200", &kinchainv1.AnalysisOptions{GyroRangeDps: 4000, AccelRangeG: 200}},
	}
	for _, c := range cases {
		q, err := url.ParseQuery(c.query)
		if err != nil {
			t.Fatal(err)
		}
		got, err := server.QueryOptions(q)
		if err != nil {
			t.Errorf("%q: %v", c.query, err)
			continue
		}
		if !proto.Equal(got, c.want) {
			t.Errorf("%q = %v, want %v", c.query, got, c.want)
		}
	}

	bad := []struct{ query, field string }{
		{"cutof_hz=1", "cutof_hz"},
		{"cutoff_hz=ten", "cutoff_hz"},
		{"cutoff_hz=1&cutoff_hz=2", "cutoff_hz"},
		{"speed=sideways", "speed"},
		{"include_series=maybe", "include_series"},
		{"neutral=1", "neutral"},
		{"neutral.middle_s=1", "neutral.middle_s"},
		{"options.cutoff_hz=1", "options.cutoff_hz"},
	}
	for _, c := range bad {
		q, _ := url.ParseQuery(c.query)
		_, err := server.QueryOptions(q)
		if status.Code(err) != codes.InvalidArgument {
			t.Errorf("%q: %v, want InvalidArgument", c.query, err)
			continue
		}
		if f := badRequest(t, err).GetFieldViolations()[0].GetField(); f != c.field {
			t.Errorf("%q: field %q, want %q", c.query, f, c.field)
		}
	}
}
