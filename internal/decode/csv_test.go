package decode_test

import (
	"errors"
	"math"
	"strconv"
	"strings"
	"testing"
	"testing/iotest"

	"google.golang.org/protobuf/encoding/prototext"
	"google.golang.org/protobuf/proto"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/decode"
	"github.com/kinchain/kinchain/internal/validate"
)

func f64(v float64) *float64 { return &v }

func num(v float64) string { return strconv.FormatFloat(v, 'g', -1, 64) }

// diff shows two messages for a failure report.
func diff(want, got proto.Message) string {
	return "want:\n" + prototext.Format(want) + "\ngot:\n" + prototext.Format(got)
}

// TestCSVDecode decodes a small hand-written file and compares it with the
// capture written out by hand.
func TestCSVDecode(t *testing.T) {
	in := "\xef\xbb\xbf# recorded on the practice range\r\n" +
		"# capture_id: s-17\r\n" +
		"# handedness: left\r\n" +
		"#club: 7-iron\r\n" +
		"# target_heading_deg: -12.5\r\n" +
		"# neutral: 0.0 : 0.5\r\n" +
		"# mounting.club: 1, 0, 0, 0\r\n" +
		"# site: bay 4: north\r\n" +
		"# empty:\r\n" +
		"\r\n" +
		" segment , time_s,qw,qx,qy,qz,gx,gy,gz\r\n" +
		"pelvis,0,1,0,0,0,,,\r\n" +
		"club,0,0.6,0,0,0.8,0.1,-0.2,3e1\r\n" +
		"# a comment between rows\r\n" +
		"   \r\n" +
		"club, 0.001 ,0.8,0,0,0.6,0.2,-0.3,-1E-3\r\n" +
		"pelvis,0.01,0,1,0,0,,,\r\n" +
		"club,0.002,NaN,0,0,1,0,0,0\r\n"
	got, loc, err := decode.CSV(strings.NewReader(in), validate.Limits{})
	if err != nil {
		t.Fatal(err)
	}
	want := &kinchainv1.Capture{
		CaptureId:        "s-17",
		Handedness:       kinchainv1.Handedness_HANDEDNESS_LEFT,
		Club:             "7-iron",
		TargetHeadingDeg: f64(-12.5),
		Neutral:          &kinchainv1.TimeWindow{StartS: 0, EndS: 0.5},
		Metadata:         map[string]string{"site": "bay 4: north", "empty": ""},
		Tracks: []*kinchainv1.Track{
			{
				Segment: kinchainv1.Segment_SEGMENT_PELVIS,
				TimeS:   []float64{0, 0.01},
				Qw:      []float64{1, 0}, Qx: []float64{0, 1}, Qy: []float64{0, 0}, Qz: []float64{0, 0},
			},
			{
				Segment: kinchainv1.Segment_SEGMENT_CLUB,
				TimeS:   []float64{0, 0.001, 0.002},
				Qw:      []float64{0.6, 0.8, math.NaN()}, Qx: []float64{0, 0, 0}, Qy: []float64{0, 0, 0}, Qz: []float64{0.8, 0.6, 1},
				Gx: []float64{0.1, 0.2, 0}, Gy: []float64{-0.2, -0.3, 0}, Gz: []float64{30, -0.001, 0},
				Mounting: &kinchainv1.Quaternion{W: 1},
			},
		},
	}
	if !proto.Equal(got, want) {
		t.Errorf("decoded capture differs:\n%s", diff(want, got))
	}
	// Lines: pelvis rows on 12 and 17, club rows on 13, 16, 18.
	for _, c := range []struct{ track, sample, line int }{
		{0, 0, 12}, {0, 1, 17}, {1, 0, 13}, {1, 1, 16}, {1, 2, 18}, {1, 3, 0}, {2, 0, 0}, {0, -1, 0},
	} {
		if got := loc.Line(c.track, c.sample); got != c.line {
			t.Errorf("Line(%d, %d) = %d, want %d", c.track, c.sample, got, c.line)
		}
	}
}

func TestCSVSegmentMetadata(t *testing.T) {
	in := "# segment: thorax\ntime_s,gx,gy,gz,ax,ay,az\n0,1,2,3,4,5,6\n0.5,1,2,3,4,5,1e400\n"
	got, _, err := decode.CSV(strings.NewReader(in), validate.Limits{})
	if err != nil {
		t.Fatal(err)
	}
	want := &kinchainv1.Capture{Tracks: []*kinchainv1.Track{{
		Segment: kinchainv1.Segment_SEGMENT_THORAX,
		TimeS:   []float64{0, 0.5},
		Gx:      []float64{1, 1}, Gy: []float64{2, 2}, Gz: []float64{3, 3},
		Ax: []float64{4, 4}, Ay: []float64{5, 5}, Az: []float64{6, math.Inf(1)}, // overflow: left to validate
	}}}
	if !proto.Equal(got, want) {
		t.Errorf("differs:\n%s", diff(want, got))
	}
}

// TestCSVErrors covers every error the CSV reader returns.
func TestCSVErrors(t *testing.T) {
	const h = "time_s,segment,qw,qx,qy,qz\n"
	cases := []struct {
		name   string
		in     string
		lim    validate.Limits
		field  string
		line   int
		reason validate.Reason
	}{
		{"empty input", "", validate.Limits{}, "header", 0, validate.ReasonMalformed},
		{"comments only", "# a\n\n# b: c\n", validate.Limits{}, "header", 3, validate.ReasonMalformed},
		{"header missing", "0,pelvis,1,0,0,0\n", validate.Limits{}, "header", 1, validate.ReasonMalformed},
		{"empty column name", "time_s,,qw\n", validate.Limits{}, "header", 1, validate.ReasonMalformed},
		{"unknown column", "# x: y\ntime_s,segment,qw,qx,qy,qz,gx_deg_per_s\n", validate.Limits{}, "gx_deg_per_s", 2, validate.ReasonUnknownColumn},
		{"quoted column", "\"time_s\",segment\n", validate.Limits{}, "\"time_s\"", 1, validate.ReasonUnknownColumn},
		{"upper-case column", "Time_s,segment\n", validate.Limits{}, "Time_s", 1, validate.ReasonUnknownColumn},
		{"duplicate column", "time_s,segment,qw,qx,qy,qz,qx\n", validate.Limits{}, "qx", 1, validate.ReasonDuplicateColumn},
		{"no time column", "segment,qw,qx,qy,qz\n", validate.Limits{}, "time_s", 1, validate.ReasonMissingColumn},
		{"partial quaternion columns", "time_s,segment,qw,qx,qy\n", validate.Limits{}, "qz", 1, validate.ReasonMissingColumn},
		{"partial accel columns", "time_s,segment,qw,qx,qy,qz,ax,az\n", validate.Limits{}, "ay", 1, validate.ReasonMissingColumn},
		{"no orientation columns", "time_s,segment,gx,gy,gz\n", validate.Limits{}, "qw", 1, validate.ReasonMissingColumn},
		{"no segment", "time_s,qw,qx,qy,qz\n", validate.Limits{}, "segment", 1, validate.ReasonMissingColumn},
		{"segment twice", "# segment: club\n" + h, validate.Limits{}, "segment", 1, validate.ReasonBadValue},
		{"metadata after header", h + "# handedness: left\n", validate.Limits{}, "handedness", 2, validate.ReasonMalformed},
		{"metadata twice", "# club: a\n# club: b\n", validate.Limits{}, "club", 2, validate.ReasonMalformed},
		{"metadata not UTF-8", "# site: \xff\n", validate.Limits{}, "site", 1, validate.ReasonMalformed},
		{"handedness word", "# handedness: both\n", validate.Limits{}, "handedness", 1, validate.ReasonBadValue},
		{"heading not a number", "# target_heading_deg: north\n", validate.Limits{}, "target_heading_deg", 1, validate.ReasonMalformed},
		{"neutral without colon", "# neutral: 0.5\n", validate.Limits{}, "neutral", 1, validate.ReasonMalformed},
		{"neutral not numbers", "# neutral: a:b\n", validate.Limits{}, "neutral", 1, validate.ReasonMalformed},
		{"segment metadata unknown", "# segment: knee\n", validate.Limits{}, "segment", 1, validate.ReasonUnknownSegment},
		{"mounting without segment", "# mounting: 1 0 0 0\n", validate.Limits{}, "mounting", 1, validate.ReasonBadValue},
		{"mounting unknown segment", "# mounting.knee: 1 0 0 0\n", validate.Limits{}, "mounting.knee", 1, validate.ReasonUnknownSegment},
		{"mounting three numbers", "# mounting.club: 1 0 0\n", validate.Limits{}, "mounting.club", 1, validate.ReasonMalformed},
		{"mounting not numbers", "# mounting.club: 1 0 0 x\n", validate.Limits{}, "mounting.club", 1, validate.ReasonMalformed},
		{"mounting without rows", "# mounting.club: 1 0 0 0\n" + h + "0,pelvis,1,0,0,0\n", validate.Limits{}, "mounting.club", 1, validate.ReasonBadValue},
		{"reserved key in other case", "# Handedness: left\n", validate.Limits{}, "Handedness", 1, validate.ReasonBadValue},
		{"bad number", h + "0,pelvis,1,0.1x,0,0\n", validate.Limits{}, "qx", 2, validate.ReasonMalformed},
		{"too few fields", h + "0,pelvis,1,0,0\n", validate.Limits{}, "", 2, validate.ReasonMalformed},
		{"too many fields", h + "0,pelvis,1,0,0,0,7\n", validate.Limits{}, "", 2, validate.ReasonMalformed},
		{"trailing comma", h + "0,pelvis,1,0,0,0,\n", validate.Limits{}, "", 2, validate.ReasonMalformed},
		{"unknown segment", h + "0,pelvis,1,0,0,0\n0,pelvic,1,0,0,0\n", validate.Limits{}, "segment", 3, validate.ReasonUnknownSegment},
		{"upper-case segment", h + "0,Pelvis,1,0,0,0\n", validate.Limits{}, "segment", 2, validate.ReasonUnknownSegment},
		{"empty segment", h + "0,,1,0,0,0\n", validate.Limits{}, "segment", 2, validate.ReasonUnknownSegment},
		{"empty time", h + ",pelvis,1,0,0,0\n", validate.Limits{}, "time_s", 2, validate.ReasonMissingField},
		{"partly filled group", h + "0,pelvis,1,0,,0\n", validate.Limits{}, "qy", 2, validate.ReasonMissingField},
		{"cell empties later", h + "0,pelvis,1,0,0,0\n0.01,pelvis,1,0,0,\n", validate.Limits{}, "qz", 3, validate.ReasonMissingField},
		{"cell fills later", "time_s,segment,qw,qx,qy,qz,px,py,pz\n0,club,1,0,0,0,,,\n0.01,club,1,0,0,0,1,2,3\n", validate.Limits{}, "px", 3, validate.ReasonMissingField},
		{"too many samples", h + "0,pelvis,1,0,0,0\n1,pelvis,1,0,0,0\n2,pelvis,1,0,0,0\n", validate.Limits{MaxSamples: 2}, "", 4, validate.ReasonTooLarge},
		{"too many segments", h + "0,pelvis,1,0,0,0\n0,club,1,0,0,0\n", validate.Limits{MaxTracks: 1}, "segment", 3, validate.ReasonTooLarge},
		// The header is 26 bytes, the first row 17: the limit is passed on line 2.
		{"too many bytes", h + "0,pelvis,1,0,0,0\n", validate.Limits{MaxBytes: 40}, "", 2, validate.ReasonTooLarge},
		{"line too long", h + "0,pelvis,1,0,0,0" + strings.Repeat(" ", decode.MaxLineBytes) + "\n", validate.Limits{}, "", 2, validate.ReasonMalformed},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			c, loc, err := decode.CSV(strings.NewReader(tc.in), tc.lim)
			var e *validate.Error
			if !errors.As(err, &e) {
				t.Fatalf("got %v (capture %v), want a *validate.Error", err, c)
			}
			if c != nil || loc != nil {
				t.Error("a result besides the error")
			}
			if e.Field != tc.field || e.Line != tc.line || e.Reason != tc.reason || e.Sample != -1 {
				t.Errorf("got field %q line %d reason %s sample %d (%v); want %q %d %s", e.Field, e.Line, e.Reason, e.Sample, err, tc.field, tc.line, tc.reason)
			}
		})
	}
}

func TestCSVReadError(t *testing.T) {
	_, _, err := decode.CSV(iotest.ErrReader(errors.New("disk on fire")), validate.Limits{})
	if validate.ReasonOf(err) != validate.ReasonMalformed || !strings.Contains(err.Error(), "disk on fire") {
		t.Errorf("got %v", err)
	}
}

// TestCSVLinesThroughValidate checks that a validation error found after
// decoding points at the file line, with rows interleaved irregularly.
func TestCSVLinesThroughValidate(t *testing.T) {
	var b strings.Builder
	b.WriteString("time_s,segment,qw,qx,qy,qz\n") // line 1
	line := 1
	badLine := 0
	for k := 0; k < 20; k++ {
		// thorax every row, pelvis on even rows only: the pelvis stride is 3
		// lines, the thorax alternates 1 and 2.
		b.WriteString(num(float64(k)/100) + ",thorax,1,0,0,0\n")
		line++
		if k%2 == 0 {
			q := "1"
			if k == 14 { // pelvis sample 7
				q, badLine = "0", line+1
			}
			b.WriteString(num(float64(k)/100) + ",pelvis," + q + ",0,0,0\n")
			line++
		}
	}
	// Ten pelvis samples are too few for the defaults; lower the minimum.
	lim := validate.Limits{MinSamples: 10}
	pc, loc, err := decode.CSV(strings.NewReader(b.String()), lim)
	if err != nil {
		t.Fatal(err)
	}
	_, err = validate.Capture(pc, lim, loc)
	var e *validate.Error
	if !errors.As(err, &e) || e.Field != "tracks[0].qw" || e.Sample != 7 || e.Line != badLine || e.Reason != validate.ReasonZeroQuaternion {
		t.Fatalf("got %v; want tracks[0].qw[7] (line %d) zero quaternion", err, badLine)
	}
	// Hand count: line 1 is the header; each even k takes two lines
	// (thorax, pelvis), each odd k one. k = 0..13 take 7·2 + 7·1 = 21 lines
	// (2..22); k = 14 puts thorax on line 23 and pelvis sample 7 on 24.
	if badLine != 24 {
		t.Errorf("the test wrote the bad row on line %d, the hand count says 24", badLine)
	}
}
