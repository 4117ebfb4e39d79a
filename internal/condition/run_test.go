package condition

import (
	"errors"
	"math"
	"strings"
	"testing"

	"gonum.org/v1/gonum/num/quat"
	"gonum.org/v1/gonum/spatial/r3"

	"github.com/kinchain/kinchain/internal/capture"
	"github.com/kinchain/kinchain/internal/rot"
)

// Bad input gets an *InputError naming the field (and sample), never a
// panic (DEVELOPERS.md, errors).
func TestRunErrors(t *testing.T) {
	good := func() *capture.Capture {
		s := spin{rot.Identity, r3.Vec{Z: 1}}
		return &capture.Capture{Tracks: []capture.Track{
			spinTrack(pelvis, s, times(nil, 0, 100, 50, 0)),
			spinTrack(thorax, s, times(nil, 0.1, 100, 50, 0)),
		}}
	}
	if _, err := Run(good(), Options{}); err != nil {
		t.Fatalf("good capture: %v", err)
	}
	for _, c := range []struct {
		name  string
		edit  func(*capture.Capture, *Options)
		field string
	}{
		{"no tracks", func(c *capture.Capture, _ *Options) { c.Tracks = nil }, "tracks"},
		{"raw IMU track", func(c *capture.Capture, _ *Options) { c.Tracks[1].Q = nil }, "tracks[1].qw"},
		{"one sample", func(c *capture.Capture, _ *Options) {
			c.Tracks[0].Time, c.Tracks[0].Q, c.Tracks[0].Gyro = c.Tracks[0].Time[:1], c.Tracks[0].Q[:1], c.Tracks[0].Gyro[:1]
		}, "tracks[0].time_s"},
		{"time not increasing", func(c *capture.Capture, _ *Options) { c.Tracks[1].Time[7] = c.Tracks[1].Time[6] }, "tracks[1].time_s[7]"},
		{"NaN time", func(c *capture.Capture, _ *Options) { c.Tracks[1].Time[0] = math.NaN() }, "tracks[1].time_s[0]"},
		{"short Q", func(c *capture.Capture, _ *Options) { c.Tracks[0].Q = c.Tracks[0].Q[:10] }, "tracks[0].qw"},
		{"short gyro", func(c *capture.Capture, _ *Options) { c.Tracks[0].Gyro = c.Tracks[0].Gyro[:10] }, "tracks[0].gx"},
		{"zero quaternion", func(c *capture.Capture, _ *Options) { c.Tracks[1].Q[3] = quat.Number{} }, "tracks[1].qw[3]"},
		{"bad mounting", func(c *capture.Capture, _ *Options) { c.Tracks[1].Mounting = &quat.Number{Real: 2} }, "tracks[1].mounting"},
		{"duplicate segment", func(c *capture.Capture, _ *Options) { c.Tracks[1].Segment = pelvis }, "tracks[1].segment"},
		{"unspecified segment", func(c *capture.Capture, _ *Options) { c.Tracks[1].Segment = 0 }, "tracks[1].segment"},
		{"no overlap", func(c *capture.Capture, _ *Options) {
			for i := range c.Tracks[1].Time {
				c.Tracks[1].Time[i] += 10
			}
		}, "tracks"},
		{"negative rate", func(_ *capture.Capture, o *Options) { o.Rate = -1 }, "options.rate_hz"},
		{"rate too high", func(_ *capture.Capture, o *Options) { o.Rate = 2 * MaxRate }, "options.rate_hz"},
		{"NaN max gap", func(_ *capture.Capture, o *Options) { o.MaxGap = math.NaN() }, "options.max_gap"},
		{"inverted neutral", func(c *capture.Capture, _ *Options) { c.Neutral = &capture.Window{Start: 0.3, End: 0.2} }, "neutral"},
		{"neutral without samples", func(c *capture.Capture, _ *Options) { c.Neutral = &capture.Window{Start: 0.01, End: 0.05} }, "neutral"},
	} {
		cp := good()
		var opt Options
		c.edit(cp, &opt)
		_, err := Run(cp, opt)
		var ie *InputError
		if !errors.As(err, &ie) {
			t.Errorf("%s: error %v, want an *InputError", c.name, err)
			continue
		}
		if !strings.HasPrefix(err.Error(), c.field+":") && !strings.HasPrefix(err.Error(), c.field+"[") {
			t.Errorf("%s: %q does not start with the field %q", c.name, err, c.field)
		}
	}
	if _, err := Run(nil, Options{}); err == nil {
		t.Error("nil capture: no error")
	}
}
