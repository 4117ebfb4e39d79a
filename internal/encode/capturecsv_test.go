package encode_test

import (
	"bytes"
	"errors"
	"math"
	"strings"
	"testing"

	"google.golang.org/protobuf/encoding/prototext"
	"google.golang.org/protobuf/proto"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/decode"
	"github.com/kinchain/kinchain/internal/encode"
	"github.com/kinchain/kinchain/internal/validate"
)

func f64(v float64) *float64 { return &v }

// TestWriteCaptureCSVText pins the output for a small capture, written out
// by hand from the format description.
func TestWriteCaptureCSVText(t *testing.T) {
	c := &kinchainv1.Capture{
		CaptureId:        "t-1",
		Handedness:       kinchainv1.Handedness_HANDEDNESS_LEFT,
		Club:             "driver",
		TargetHeadingDeg: f64(-90),
		Neutral:          &kinchainv1.TimeWindow{StartS: 0, EndS: 0.02},
		Metadata:         map[string]string{"z.note": "last", "a-site": "bay: 3", "empty": ""},
		Tracks: []*kinchainv1.Track{
			{
				Segment: kinchainv1.Segment_SEGMENT_PELVIS,
				TimeS:   []float64{0, 0.02},
				Qw:      []float64{1, 0.6}, Qx: []float64{0, 0}, Qy: []float64{0, 0}, Qz: []float64{0, 0.8},
				Mounting: &kinchainv1.Quaternion{W: 1},
			},
			{
				Segment: kinchainv1.Segment_SEGMENT_CLUB,
				TimeS:   []float64{0, 0.01, 0.02},
				Gx:      []float64{0.1, 1e-7, -3}, Gy: []float64{0, 0, 0}, Gz: []float64{1.5, 2, 1 / 3.0},
				Ax: []float64{0, 0, 0}, Ay: []float64{0, 0, 0}, Az: []float64{9.81, 9.8, math.NaN()},
			},
		},
	}
	want := `# capture_id: t-1
# handedness: left
# club: driver
# target_heading_deg: -90
# neutral: 0:0.02
# mounting.pelvis: 1 0 0 0
# a-site: bay: 3
# empty:
# z.note: last
time_s,segment,qw,qx,qy,qz,gx,gy,gz,ax,ay,az
0,pelvis,1,0,0,0,,,,,,
0,club,,,,,0.1,0,1.5,0,0,9.81
0.01,club,,,,,1e-07,0,2,0,0,9.8
0.02,pelvis,0.6,0,0,0.8,,,,,,
0.02,club,,,,,-3,0,0.3333333333333333,0,0,NaN
`
	var b bytes.Buffer
	if err := encode.WriteCaptureCSV(&b, c); err != nil {
		t.Fatal(err)
	}
	if b.String() != want {
		t.Errorf("got\n%s\nwant\n%s", b.String(), want)
	}
	got, _, err := decode.CSV(&b, validate.Limits{})
	if err != nil {
		t.Fatal(err)
	}
	if !proto.Equal(got, c) {
		t.Errorf("round trip differs:\n%s\n%s", prototext.Format(c), prototext.Format(got))
	}
}

// spin returns a track of n samples at rate Hz turning about z at w rad/s,
// with every optional group when full is set.
func spin(seg kinchainv1.Segment, n int, rate, w float64, full bool) *kinchainv1.Track {
	t := &kinchainv1.Track{Segment: seg}
	for k := range n {
		tk := float64(k) / rate
		t.TimeS = append(t.TimeS, tk)
		t.Qw, t.Qx, t.Qy, t.Qz = append(t.Qw, math.Cos(w*tk/2)), append(t.Qx, 0), append(t.Qy, 0), append(t.Qz, math.Sin(w*tk/2))
		if full {
			t.Gx, t.Gy, t.Gz = append(t.Gx, 0), append(t.Gy, -0.0), append(t.Gz, w)
			t.Ax, t.Ay, t.Az = append(t.Ax, 1e-300), append(t.Ay, -1e300), append(t.Az, 9.80665)
			t.Mx, t.My, t.Mz = append(t.Mx, 21.5), append(t.My, -4.25), append(t.Mz, 43.75)
			t.Px, t.Py, t.Pz = append(t.Px, 0.1*tk), append(t.Py, math.Pi), append(t.Pz, 1.0/7)
		}
	}
	return t
}

func TestWriteCaptureCSVRoundTrip(t *testing.T) {
	raw := spin(kinchainv1.Segment_SEGMENT_LEAD_HAND, 37, 250, 2, true)
	raw.Qw, raw.Qx, raw.Qy, raw.Qz = nil, nil, nil, nil
	captures := map[string]*kinchainv1.Capture{
		"empty":         {},
		"metadata only": {CaptureId: "x", Metadata: map[string]string{"k": "v"}},
		"three rates": {Tracks: []*kinchainv1.Track{
			spin(kinchainv1.Segment_SEGMENT_PELVIS, 100, 100, 1, false),
			spin(kinchainv1.Segment_SEGMENT_THORAX, 300, 300, -2.5, true),
			raw,
			spin(kinchainv1.Segment_SEGMENT_CLUB, 1000, 1000, 30, false),
		}},
		"time only": {Tracks: []*kinchainv1.Track{{Segment: kinchainv1.Segment_SEGMENT_HEAD, TimeS: []float64{-1, 2}}}},
		"non-finite": {TargetHeadingDeg: f64(math.Inf(-1)), Neutral: &kinchainv1.TimeWindow{StartS: math.NaN(), EndS: 1e-310}, Tracks: []*kinchainv1.Track{{
			Segment: kinchainv1.Segment_SEGMENT_TRAIL_FOREARM, TimeS: []float64{math.NaN(), math.Inf(1)},
			Qw: []float64{math.Inf(-1), 0}, Qx: []float64{0, 5e-324}, Qy: []float64{math.MaxFloat64, 0}, Qz: []float64{0, -math.SmallestNonzeroFloat64},
			Mounting: &kinchainv1.Quaternion{W: math.NaN(), X: -0.5},
		}}},
		"unicode strings": {CaptureId: "prise 3 · überkopf", Club: "fer 7 «test»", Metadata: map[string]string{"note_1": "ångström: 5 # not a comment"}},
	}
	for name, c := range captures {
		t.Run(name, func(t *testing.T) {
			var b bytes.Buffer
			if err := encode.WriteCaptureCSV(&b, c); err != nil {
				t.Fatal(err)
			}
			got, _, err := decode.CSV(bytes.NewReader(b.Bytes()), validate.Limits{})
			if err != nil {
				t.Fatalf("%v\n%s", err, b.String())
			}
			if !proto.Equal(got, c) {
				t.Errorf("round trip differs:\n%s\n%s", prototext.Format(c), prototext.Format(got))
			}
		})
	}
}

// TestWriteCaptureCSVOrder: tracks out of segment order come back sorted.
func TestWriteCaptureCSVOrder(t *testing.T) {
	c := &kinchainv1.Capture{Tracks: []*kinchainv1.Track{
		spin(kinchainv1.Segment_SEGMENT_CLUB, 20, 100, 1, false),
		spin(kinchainv1.Segment_SEGMENT_PELVIS, 20, 100, 1, false),
	}}
	var b bytes.Buffer
	if err := encode.WriteCaptureCSV(&b, c); err != nil {
		t.Fatal(err)
	}
	got, _, err := decode.CSV(&b, validate.Limits{})
	if err != nil {
		t.Fatal(err)
	}
	want := &kinchainv1.Capture{Tracks: []*kinchainv1.Track{c.Tracks[1], c.Tracks[0]}}
	if !proto.Equal(got, want) {
		t.Error("tracks not in segment order")
	}
}

func TestWriteCaptureCSVErrors(t *testing.T) {
	ok := func() *kinchainv1.Capture {
		return &kinchainv1.Capture{Tracks: []*kinchainv1.Track{spin(kinchainv1.Segment_SEGMENT_PELVIS, 3, 100, 1, false)}}
	}
	cases := map[string]func(c *kinchainv1.Capture){
		"capture_id line break":  func(c *kinchainv1.Capture) { c.CaptureId = "a\nb" },
		"club surrounding blank": func(c *kinchainv1.Capture) { c.Club = " 7-iron" },
		"club invalid UTF-8":     func(c *kinchainv1.Capture) { c.Club = "\xff" },
		"handedness":             func(c *kinchainv1.Capture) { c.Handedness = 5 },
		"metadata empty key":     func(c *kinchainv1.Capture) { c.Metadata = map[string]string{"": "x"} },
		"metadata key space":     func(c *kinchainv1.Capture) { c.Metadata = map[string]string{"a b": "x"} },
		"metadata reserved":      func(c *kinchainv1.Capture) { c.Metadata = map[string]string{"club": "x"} },
		"metadata reserved case": func(c *kinchainv1.Capture) { c.Metadata = map[string]string{"Neutral": "x"} },
		"metadata mounting":      func(c *kinchainv1.Capture) { c.Metadata = map[string]string{"mounting.head": "1 0 0 0"} },
		"metadata value CR":      func(c *kinchainv1.Capture) { c.Metadata = map[string]string{"k": "a\r"} },
		"metadata value tab":     func(c *kinchainv1.Capture) { c.Metadata = map[string]string{"k": "a\t"} },
		"unknown segment":        func(c *kinchainv1.Capture) { c.Tracks[0].Segment = 0 },
		"segment out of range":   func(c *kinchainv1.Capture) { c.Tracks[0].Segment = 40 },
		"repeated segment":       func(c *kinchainv1.Capture) { c.Tracks = append(c.Tracks, c.Tracks[0]) },
		"no samples":             func(c *kinchainv1.Capture) { c.Tracks[0] = &kinchainv1.Track{Segment: 1} },
		"length mismatch":        func(c *kinchainv1.Capture) { c.Tracks[0].Qx = c.Tracks[0].Qx[:2] },
		"partial group":          func(c *kinchainv1.Capture) { c.Tracks[0].Mx = []float64{1, 2, 3} },
	}
	for name, mutate := range cases {
		c := ok()
		mutate(c)
		var b bytes.Buffer
		err := encode.WriteCaptureCSV(&b, c)
		if err == nil || !strings.HasPrefix(err.Error(), "capture csv: ") {
			t.Errorf("%s: got %v", name, err)
		}
		if b.Len() != 0 {
			t.Errorf("%s: wrote %d bytes before failing", name, b.Len())
		}
	}
	if err := encode.WriteCaptureCSV(&bytes.Buffer{}, nil); err == nil {
		t.Error("nil capture accepted")
	}
	if err := encode.WriteCaptureCSV(failWriter{}, ok()); err == nil || !strings.Contains(err.Error(), "disk full") {
		t.Errorf("write error lost: %v", err)
	}
}

type failWriter struct{}

func (failWriter) Write([]byte) (int, error) { return 0, errors.New("disk full") }
