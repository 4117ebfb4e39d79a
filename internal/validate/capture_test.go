package validate_test

import (
	"errors"
	"fmt"
	"math"
	"strings"
	"testing"

	"gonum.org/v1/gonum/num/quat"
	"gonum.org/v1/gonum/spatial/r3"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/validate"
)

// track returns a valid quaternion track of n samples at 100 Hz starting at
// t0, all at the identity orientation.
func track(seg kinchainv1.Segment, n int, t0 float64) *kinchainv1.Track {
	t := &kinchainv1.Track{Segment: seg}
	for k := 0; k < n; k++ {
		t.TimeS = append(t.TimeS, t0+float64(k)/100)
		t.Qw = append(t.Qw, 1)
		t.Qx = append(t.Qx, 0)
		t.Qy = append(t.Qy, 0)
		t.Qz = append(t.Qz, 0)
	}
	return t
}

// imu adds gyroscope and accelerometer arrays at rest (gravity along +z).
func imu(t *kinchainv1.Track) *kinchainv1.Track {
	for range t.TimeS {
		t.Gx, t.Gy, t.Gz = append(t.Gx, 0), append(t.Gy, 0), append(t.Gz, 0.5)
		t.Ax, t.Ay, t.Az = append(t.Ax, 0), append(t.Ay, 0), append(t.Az, 9.81)
	}
	return t
}

func good() *kinchainv1.Capture {
	return &kinchainv1.Capture{
		CaptureId: "c1",
		Tracks: []*kinchainv1.Track{
			track(kinchainv1.Segment_SEGMENT_PELVIS, 20, 0),
			imu(track(kinchainv1.Segment_SEGMENT_THORAX, 20, 0)),
		},
	}
}

// lines is a Locator: track i, sample k is on line 1000·i + k + 2.
type lines struct{}

func (lines) Line(i, k int) int { return 1000*i + k + 2 }

func TestCaptureErrors(t *testing.T) {
	nan, inf := math.NaN(), math.Inf(1)
	f := func(v float64) *float64 { return &v }
	cases := []struct {
		name   string
		mutate func(c *kinchainv1.Capture)
		lim    validate.Limits
		field  string
		sample int
		line   int
		reason validate.Reason
	}{
		{"no tracks", func(c *kinchainv1.Capture) { c.Tracks = nil }, validate.Limits{}, "tracks", -1, 0, validate.ReasonEmpty},
		{"too many tracks", func(c *kinchainv1.Capture) {
			c.Tracks = append(c.Tracks, track(kinchainv1.Segment_SEGMENT_HEAD, 20, 0))
		}, validate.Limits{MaxTracks: 2}, "tracks", -1, 0, validate.ReasonTooLarge},
		// 40 samples in all, limit 39.
		{"too many samples", func(c *kinchainv1.Capture) {}, validate.Limits{MaxSamples: 39}, "tracks", -1, 0, validate.ReasonTooLarge},
		{"handedness", func(c *kinchainv1.Capture) { c.Handedness = 3 }, validate.Limits{}, "handedness", -1, 0, validate.ReasonBadValue},
		{"heading NaN", func(c *kinchainv1.Capture) { c.TargetHeadingDeg = f(nan) }, validate.Limits{}, "target_heading_deg", -1, 0, validate.ReasonNonFinite},
		{"segment unset", func(c *kinchainv1.Capture) { c.Tracks[1].Segment = 0 }, validate.Limits{}, "tracks[1].segment", -1, 1002, validate.ReasonUnknownSegment},
		{"segment out of range", func(c *kinchainv1.Capture) { c.Tracks[1].Segment = 11 }, validate.Limits{}, "tracks[1].segment", -1, 1002, validate.ReasonUnknownSegment},
		{"segment negative", func(c *kinchainv1.Capture) { c.Tracks[0].Segment = -1 }, validate.Limits{}, "tracks[0].segment", -1, 2, validate.ReasonUnknownSegment},
		{"duplicate segment", func(c *kinchainv1.Capture) { c.Tracks[1].Segment = kinchainv1.Segment_SEGMENT_PELVIS }, validate.Limits{}, "tracks[1].segment", -1, 1002, validate.ReasonDuplicateSegment},
		{"no samples", func(c *kinchainv1.Capture) {
			c.Tracks[1] = &kinchainv1.Track{Segment: kinchainv1.Segment_SEGMENT_THORAX}
		}, validate.Limits{}, "tracks[1].time_s", -1, 1002, validate.ReasonEmpty},
		{"length mismatch qy", func(c *kinchainv1.Capture) { c.Tracks[0].Qy = c.Tracks[0].Qy[:19] }, validate.Limits{}, "tracks[0].qy", -1, 2, validate.ReasonLengthMismatch},
		{"length mismatch az", func(c *kinchainv1.Capture) { c.Tracks[1].Az = append(c.Tracks[1].Az, 1) }, validate.Limits{}, "tracks[1].az", -1, 1002, validate.ReasonLengthMismatch},
		{"partial quaternion", func(c *kinchainv1.Capture) { c.Tracks[0].Qz = nil }, validate.Limits{}, "tracks[0].qz", -1, 2, validate.ReasonMissingField},
		{"partial gyro", func(c *kinchainv1.Capture) { c.Tracks[1].Gy = nil }, validate.Limits{}, "tracks[1].gy", -1, 1002, validate.ReasonMissingField},
		{"partial mag", func(c *kinchainv1.Capture) { c.Tracks[0].Mx = make([]float64, 20) }, validate.Limits{}, "tracks[0].my", -1, 2, validate.ReasonMissingField},
		{"partial position", func(c *kinchainv1.Capture) {
			c.Tracks[0].Px, c.Tracks[0].Pz = make([]float64, 20), make([]float64, 20)
		}, validate.Limits{}, "tracks[0].py", -1, 2, validate.ReasonMissingField},
		{"gyro without accel", func(c *kinchainv1.Capture) {
			tr := c.Tracks[1]
			tr.Qw, tr.Qx, tr.Qy, tr.Qz, tr.Ax, tr.Ay, tr.Az = nil, nil, nil, nil, nil, nil, nil
		}, validate.Limits{}, "tracks[1].ax", -1, 1002, validate.ReasonMissingField},
		{"accel without gyro", func(c *kinchainv1.Capture) {
			tr := c.Tracks[1]
			tr.Qw, tr.Qx, tr.Qy, tr.Qz, tr.Gx, tr.Gy, tr.Gz = nil, nil, nil, nil, nil, nil, nil
		}, validate.Limits{}, "tracks[1].gx", -1, 1002, validate.ReasonMissingField},
		{"no orientation", func(c *kinchainv1.Capture) {
			tr := c.Tracks[0]
			tr.Qw, tr.Qx, tr.Qy, tr.Qz = nil, nil, nil, nil
			tr.Px, tr.Py, tr.Pz = make([]float64, 20), make([]float64, 20), make([]float64, 20)
		}, validate.Limits{}, "tracks[0].qw", -1, 2, validate.ReasonMissingField},
		{"too few samples", func(c *kinchainv1.Capture) { c.Tracks[0] = track(kinchainv1.Segment_SEGMENT_PELVIS, 15, 0) }, validate.Limits{}, "tracks[0].time_s", -1, 2, validate.ReasonTooFewSamples},
		{"single sample, MinSamples 1 acts as 2", func(c *kinchainv1.Capture) { c.Tracks[0] = track(kinchainv1.Segment_SEGMENT_PELVIS, 1, 0) }, validate.Limits{MinSamples: 1}, "tracks[0].time_s", -1, 2, validate.ReasonTooFewSamples},
		{"time NaN", func(c *kinchainv1.Capture) { c.Tracks[1].TimeS[7] = nan }, validate.Limits{}, "tracks[1].time_s", 7, 1009, validate.ReasonNonFinite},
		{"time Inf first", func(c *kinchainv1.Capture) { c.Tracks[0].TimeS[0] = -inf }, validate.Limits{}, "tracks[0].time_s", 0, 2, validate.ReasonNonFinite},
		{"time backwards", func(c *kinchainv1.Capture) { c.Tracks[0].TimeS[5] = 0.035 }, validate.Limits{}, "tracks[0].time_s", 5, 7, validate.ReasonTimeOrder},
		{"duplicate time", func(c *kinchainv1.Capture) { c.Tracks[1].TimeS[19] = c.Tracks[1].TimeS[18] }, validate.Limits{}, "tracks[1].time_s", 19, 1021, validate.ReasonDuplicateTime},
		// 20 samples at 100 Hz span 0.19 s.
		{"track too long", func(c *kinchainv1.Capture) {}, validate.Limits{MaxDuration: 0.18}, "tracks[0].time_s", -1, 2, validate.ReasonTooLarge},
		{"capture too long", func(c *kinchainv1.Capture) { c.Tracks[1] = track(kinchainv1.Segment_SEGMENT_THORAX, 20, 0.1) }, validate.Limits{MaxDuration: 0.2}, "tracks", -1, 0, validate.ReasonTooLarge},
		// 100 Hz is outside 150..10000 and 20..90 Hz.
		{"rate too low", func(c *kinchainv1.Capture) {}, validate.Limits{MinRate: 150}, "tracks[0].time_s", -1, 2, validate.ReasonRateOutOfRange},
		{"rate too high", func(c *kinchainv1.Capture) {}, validate.Limits{MaxRate: 90}, "tracks[0].time_s", -1, 2, validate.ReasonRateOutOfRange},
		{"qx NaN", func(c *kinchainv1.Capture) { c.Tracks[0].Qx[3] = nan }, validate.Limits{}, "tracks[0].qx", 3, 5, validate.ReasonNonFinite},
		{"gz Inf", func(c *kinchainv1.Capture) { c.Tracks[1].Gz[4] = inf }, validate.Limits{}, "tracks[1].gz", 4, 1006, validate.ReasonNonFinite},
		{"px NaN", func(c *kinchainv1.Capture) {
			c.Tracks[0].Px, c.Tracks[0].Py, c.Tracks[0].Pz = make([]float64, 20), make([]float64, 20), make([]float64, 20)
			c.Tracks[0].Py[11] = nan
		}, validate.Limits{}, "tracks[0].py", 11, 13, validate.ReasonNonFinite},
		// Sample order wins over array order: qz[2] comes before qw[3].
		{"first sample first", func(c *kinchainv1.Capture) { c.Tracks[0].Qw[3], c.Tracks[0].Qz[2] = nan, nan }, validate.Limits{}, "tracks[0].qz", 2, 4, validate.ReasonNonFinite},
		{"zero quaternion", func(c *kinchainv1.Capture) { c.Tracks[0].Qw[6] = 0 }, validate.Limits{}, "tracks[0].qw", 6, 8, validate.ReasonZeroQuaternion},
		// ‖(1.0101, 0, 0, 0)‖ − 1 = 0.0101 > 0.01.
		{"not unit", func(c *kinchainv1.Capture) { c.Tracks[0].Qw[9] = 1.0101 }, validate.Limits{}, "tracks[0].qw", 9, 11, validate.ReasonNotUnit},
		{"raw integer quaternion", func(c *kinchainv1.Capture) { c.Tracks[0].Qw[0] = 16384 }, validate.Limits{}, "tracks[0].qw", 0, 2, validate.ReasonNotUnit},
		// 573 °/s written as if rad/s.
		{"gyro in degrees", func(c *kinchainv1.Capture) { c.Tracks[1].Gy[12] = -573 }, validate.Limits{}, "tracks[1].gy", 12, 1014, validate.ReasonImplausible},
		{"accel in g", func(c *kinchainv1.Capture) {
			for k := range c.Tracks[1].Az {
				c.Tracks[1].Az[k] = 1
			}
		}, validate.Limits{}, "tracks[1].ax", -1, 1002, validate.ReasonImplausible},
		{"mounting NaN", func(c *kinchainv1.Capture) { c.Tracks[1].Mounting = &kinchainv1.Quaternion{W: nan} }, validate.Limits{}, "tracks[1].mounting", -1, 1002, validate.ReasonNonFinite},
		{"mounting zero", func(c *kinchainv1.Capture) { c.Tracks[0].Mounting = &kinchainv1.Quaternion{} }, validate.Limits{}, "tracks[0].mounting", -1, 2, validate.ReasonZeroQuaternion},
		{"neutral reversed", func(c *kinchainv1.Capture) { c.Neutral = &kinchainv1.TimeWindow{StartS: 0.1, EndS: 0.05} }, validate.Limits{}, "neutral", -1, 0, validate.ReasonBadWindow},
		{"neutral empty", func(c *kinchainv1.Capture) { c.Neutral = &kinchainv1.TimeWindow{StartS: 0.1, EndS: 0.1} }, validate.Limits{}, "neutral", -1, 0, validate.ReasonBadWindow},
		{"neutral NaN", func(c *kinchainv1.Capture) { c.Neutral = &kinchainv1.TimeWindow{StartS: nan, EndS: 0.1} }, validate.Limits{}, "neutral.start_s", -1, 0, validate.ReasonNonFinite},
		{"neutral Inf end", func(c *kinchainv1.Capture) { c.Neutral = &kinchainv1.TimeWindow{StartS: 0, EndS: inf} }, validate.Limits{}, "neutral.end_s", -1, 0, validate.ReasonNonFinite},
		{"neutral before", func(c *kinchainv1.Capture) { c.Neutral = &kinchainv1.TimeWindow{StartS: -0.01, EndS: 0.1} }, validate.Limits{}, "neutral.start_s", -1, 0, validate.ReasonBadWindow},
		// The samples end at 0.19 s.
		{"neutral after", func(c *kinchainv1.Capture) { c.Neutral = &kinchainv1.TimeWindow{StartS: 0.1, EndS: 0.2} }, validate.Limits{}, "neutral.end_s", -1, 0, validate.ReasonBadWindow},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			c := good()
			tc.mutate(c)
			got, err := validate.Capture(c, tc.lim, lines{})
			if err == nil {
				t.Fatalf("no error; got %d tracks", len(got.Tracks))
			}
			var e *validate.Error
			if !errors.As(err, &e) {
				t.Fatalf("error %T %v is not a *validate.Error", err, err)
			}
			if e.Field != tc.field || e.Sample != tc.sample || e.Line != tc.line || e.Reason != tc.reason {
				t.Errorf("got field %q sample %d line %d reason %s; want %q %d %d %s (%v)", e.Field, e.Sample, e.Line, e.Reason, tc.field, tc.sample, tc.line, tc.reason, err)
			}
			if validate.ReasonOf(err) != tc.reason {
				t.Errorf("ReasonOf = %s", validate.ReasonOf(err))
			}
			if e.Detail == "" {
				t.Error("empty detail")
			}
		})
	}
}

func TestCaptureNil(t *testing.T) {
	_, err := validate.Capture(nil, validate.Limits{}, nil)
	if validate.ReasonOf(err) != validate.ReasonMissingField {
		t.Fatalf("got %v", err)
	}
}

// TestCaptureMessages pins the exact text of a few errors, the format the
// contributor guide promises.
func TestCaptureMessages(t *testing.T) {
	c := good()
	c.Tracks[1].TimeS[5] = 0.035 // previous sample is at 0.04 s
	_, err := validate.Capture(c, validate.Limits{}, lines{})
	want := "tracks[1].time_s[5] (line 1007): not after the previous sample (0.035 s ≤ 0.04 s)"
	if err == nil || err.Error() != want {
		t.Errorf("got %v\nwant %s", err, want)
	}
	c = good()
	c.Tracks[0].TimeS = c.Tracks[0].TimeS[:3]
	c.Tracks[0].Qw, c.Tracks[0].Qx, c.Tracks[0].Qy, c.Tracks[0].Qz = c.Tracks[0].Qw[:3], c.Tracks[0].Qx[:3], c.Tracks[0].Qy[:3], c.Tracks[0].Qz[:3]
	_, err = validate.Capture(c, validate.Limits{}, nil)
	want = "tracks[0].time_s: pelvis has 3 samples; the analysis needs at least 16"
	if err == nil || err.Error() != want {
		t.Errorf("got %v\nwant %s", err, want)
	}
	c = good()
	for k := range c.Tracks[0].TimeS {
		c.Tracks[0].TimeS[k] = float64(k) // 1 Hz
	}
	_, err = validate.Capture(c, validate.Limits{}, nil)
	want = "tracks[0].time_s: pelvis runs at 1 Hz (median interval 1 s); accepted 20–10000 Hz"
	if err == nil || err.Error() != want {
		t.Errorf("got %v\nwant %s", err, want)
	}
}

func TestCaptureConversion(t *testing.T) {
	c := good()
	c.Handedness = kinchainv1.Handedness_HANDEDNESS_LEFT
	c.Club = "7-iron"
	c.Metadata = map[string]string{"site": "range 3"}
	h := 90.0
	c.TargetHeadingDeg = &h
	c.Neutral = &kinchainv1.TimeWindow{StartS: 0, EndS: 0.19}
	p := c.Tracks[0]
	p.Qw[1], p.Qz[1] = 0.6, 0.8 // unit: 0.36 + 0.64 = 1
	p.Qw[2] = 1.005             // renormalised, counted
	p.Qw[3] = 1 + 1e-7          // renormalised, not counted (float32 rounding)
	p.Qw[4], p.Qx[4], p.Qy[4], p.Qz[4] = 0.5, -0.5, 0.5, -0.5
	p.Qw[5] = 0.995 // counted
	p.Mounting = &kinchainv1.Quaternion{W: 1, Z: 1}
	th := c.Tracks[1]
	th.Mx, th.My, th.Mz = make([]float64, 20), make([]float64, 20), make([]float64, 20)
	th.Px, th.Py, th.Pz = make([]float64, 20), make([]float64, 20), make([]float64, 20)
	th.Mx[3], th.My[3], th.Mz[3] = 20, -5, 40
	th.Px[4], th.Py[4], th.Pz[4] = 0.1, 0.2, 1.1
	th.Gx[2] = 199.9 // just inside MaxAngularRate

	out, err := validate.Capture(c, validate.Limits{}, nil)
	if err != nil {
		t.Fatal(err)
	}
	if out.ID != "c1" || out.Club != "7-iron" || out.Handedness != kinchainv1.Handedness_HANDEDNESS_LEFT || out.Metadata["site"] != "range 3" {
		t.Errorf("header fields: %+v", out)
	}
	if out.TargetHeading == nil || math.Abs(*out.TargetHeading-math.Pi/2) > 1e-15 {
		t.Errorf("target heading %v, want π/2", out.TargetHeading)
	}
	if out.Neutral == nil || out.Neutral.Start != 0 || out.Neutral.End != 0.19 {
		t.Errorf("neutral %+v", out.Neutral)
	}
	pt := out.Tracks[0]
	if pt.Segment != kinchainv1.Segment_SEGMENT_PELVIS || pt.Len() != 20 || pt.Gyro != nil || pt.Accel != nil || pt.Mag != nil || pt.Pos != nil {
		t.Errorf("pelvis track shape wrong: %+v", pt)
	}
	if pt.Renormalized != 2 {
		t.Errorf("Renormalized = %d, want 2 (samples 2 and 5)", pt.Renormalized)
	}
	wantQ := map[int]quat.Number{
		0: {Real: 1},
		1: {Real: 0.6, Kmag: 0.8},
		2: {Real: 1},
		3: {Real: 1},
		4: {Real: 0.5, Imag: -0.5, Jmag: 0.5, Kmag: -0.5},
		5: {Real: 1},
	}
	for k, w := range wantQ {
		if quat.Abs(quat.Sub(pt.Q[k], w)) > 1e-15 {
			t.Errorf("Q[%d] = %v, want %v", k, pt.Q[k], w)
		}
	}
	s := math.Sqrt(0.5) // (1, 0, 0, 1)/√2
	if m := pt.Mounting; m == nil || quat.Abs(quat.Sub(*m, quat.Number{Real: s, Kmag: s})) > 1e-15 {
		t.Errorf("mounting %v, want (√½, 0, 0, √½)", pt.Mounting)
	}
	tt := out.Tracks[1]
	if tt.Gyro[2] != (r3.Vec{X: 199.9, Z: 0.5}) || tt.Accel[7] != (r3.Vec{Z: 9.81}) || tt.Mag[3] != (r3.Vec{X: 20, Y: -5, Z: 40}) || tt.Pos[4] != (r3.Vec{X: 0.1, Y: 0.2, Z: 1.1}) {
		t.Errorf("vectors wrong: %v %v %v %v", tt.Gyro[2], tt.Accel[7], tt.Mag[3], tt.Pos[4])
	}
	if tt.Time[19] != 0.19 {
		t.Errorf("time %v", tt.Time[19])
	}
	// The result does not share memory with the input.
	c.Tracks[1].TimeS[0] = -5
	c.Metadata["site"] = "x"
	if tt.Time[0] != 0 || out.Metadata["site"] != "range 3" {
		t.Error("result aliases the input")
	}
}

func TestRawIMUTrackAccepted(t *testing.T) {
	c := good()
	tr := c.Tracks[1]
	tr.Qw, tr.Qx, tr.Qy, tr.Qz = nil, nil, nil, nil
	out, err := validate.Capture(c, validate.Limits{}, nil)
	if err != nil {
		t.Fatal(err)
	}
	if out.Tracks[1].Q != nil || len(out.Tracks[1].Gyro) != 20 || out.Tracks[1].Fused {
		t.Errorf("raw track: %+v", out.Tracks[1])
	}
}

func TestRate(t *testing.T) {
	// Hand-computed medians.
	cases := []struct {
		t        []float64
		rate, dt float64
	}{
		{[]float64{0, 0.01, 0.02, 0.04}, 100, 0.01}, // intervals .01 .01 .02
		{[]float64{0, 1, 3}, 1 / 1.5, 1.5},          // intervals 1 2: mean of the middle two
		// intervals .002 .001 .001 .096, sorted .001 .001 .002 .096: (.001 + .002)/2
		{[]float64{0, 0.002, 0.003, 0.004, 0.1}, 1 / 0.0015, 0.0015},
		{[]float64{5}, 0, 0},
	}
	for _, tc := range cases {
		r, dt := validate.Rate(tc.t)
		if math.Abs(dt-tc.dt) > 1e-12 || math.Abs(r-tc.rate) > 1e-9*tc.rate {
			t.Errorf("Rate(%v) = %v, %v; want %v, %v", tc.t, r, dt, tc.rate, tc.dt)
		}
	}
}

func TestErrorFormat(t *testing.T) {
	cases := []struct {
		e    validate.Error
		want string
	}{
		{validate.Error{Field: "tracks[2].time_s", Sample: 118, Line: 120, Detail: "x"}, "tracks[2].time_s[118] (line 120): x"},
		{validate.Error{Field: "tracks[2].qw", Sample: -1, Line: 0, Detail: "x"}, "tracks[2].qw: x"},
		{validate.Error{Field: "qx", Sample: -1, Line: 7, Detail: "x"}, "qx (line 7): x"},
		{validate.Error{Sample: -1, Line: 7, Detail: "x"}, "line 7: x"},
		{validate.Error{Sample: -1, Detail: "x"}, "x"},
	}
	for _, tc := range cases {
		if got := tc.e.Error(); got != tc.want {
			t.Errorf("got %q, want %q", got, tc.want)
		}
	}
}

func TestReasonOf(t *testing.T) {
	e := &validate.Error{Reason: validate.ReasonNotUnit}
	if validate.ReasonOf(nil) != "" || validate.ReasonOf(errors.New("x")) != validate.ReasonOther ||
		validate.ReasonOf(fmt.Errorf("wrapped: %w", e)) != validate.ReasonNotUnit ||
		validate.ReasonOf(errors.Join(errors.New("a"), e)) != validate.ReasonNotUnit {
		t.Error("ReasonOf")
	}
	seen := map[validate.Reason]bool{}
	for _, r := range validate.AllReasons() {
		if seen[r] || r == "" || strings.ToLower(string(r)) != string(r) || strings.ContainsAny(string(r), " -") {
			t.Errorf("reason %q repeated or not a lower_snake label", r)
		}
		seen[r] = true
	}
}

func TestLimitsDefaults(t *testing.T) {
	d := validate.DefaultLimits()
	want := validate.Limits{MaxSamples: 4_000_000, MaxTracks: 16, MaxDuration: 3600, MinRate: 20, MaxRate: 10_000, MinSamples: 16, MaxBytes: 64 << 20}
	if d != want {
		t.Errorf("DefaultLimits = %+v", d)
	}
	if (validate.Limits{}).WithDefaults() != want {
		t.Error("zero Limits do not give the defaults")
	}
	got := validate.Limits{MaxTracks: 3, MinSamples: 1, MaxRate: -1}.WithDefaults()
	if got.MaxTracks != 3 || got.MinSamples != 2 || got.MaxRate != 10_000 || got.MaxSamples != 4_000_000 {
		t.Errorf("partial Limits: %+v", got)
	}
}
