package decode_test

import (
	"errors"
	"math"
	"strings"
	"testing"

	"google.golang.org/protobuf/proto"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/decode"
	"github.com/kinchain/kinchain/internal/validate"
)

func TestJSONDecode(t *testing.T) {
	in := `{
  "capture_id": "j1",
  "handedness": "HANDEDNESS_RIGHT",
  "targetHeadingDeg": 30,
  "neutral": {"startS": 0, "end_s": 0.25},
  "metadata": {"site": "bay 2"},
  "tracks": [
    {"segment": "SEGMENT_THORAX", "timeS": [0, 0.01], "qw": [1, "NaN"], "qx": [0, "0.5"], "qy": [0, 0], "qz": [0, "-Infinity"],
     "mounting": {"w": 1}},
    {"segment": 10, "time_s": [0], "gx": [1], "gy": [2], "gz": [3], "ax": [4], "ay": [5], "az": [6], "px": null}
  ]
}`
	got, err := decode.JSON([]byte(in))
	if err != nil {
		t.Fatal(err)
	}
	want := &kinchainv1.Capture{
		CaptureId:        "j1",
		Handedness:       kinchainv1.Handedness_HANDEDNESS_RIGHT,
		TargetHeadingDeg: f64(30),
		Neutral:          &kinchainv1.TimeWindow{StartS: 0, EndS: 0.25},
		Metadata:         map[string]string{"site": "bay 2"},
		Tracks: []*kinchainv1.Track{
			{Segment: kinchainv1.Segment_SEGMENT_THORAX, TimeS: []float64{0, 0.01}, Qw: []float64{1, math.NaN()}, Qx: []float64{0, 0.5}, Qy: []float64{0, 0}, Qz: []float64{0, math.Inf(-1)}, Mounting: &kinchainv1.Quaternion{W: 1}},
			{Segment: kinchainv1.Segment_SEGMENT_CLUB, TimeS: []float64{0}, Gx: []float64{1}, Gy: []float64{2}, Gz: []float64{3}, Ax: []float64{4}, Ay: []float64{5}, Az: []float64{6}},
		},
	}
	if !proto.Equal(got, want) {
		t.Errorf("differs:\n%s", diff(want, got))
	}
}

func TestJSONRequest(t *testing.T) {
	in := `{"capture": {"tracks": [{"segment": "SEGMENT_PELVIS", "timeS": [0]}]}, "options": {"cutoffHz": 12, "filter_order": 4, "speed": "SPEED_DEFINITION_VERTICAL"}}`
	got, err := decode.JSONRequest([]byte(in))
	if err != nil {
		t.Fatal(err)
	}
	want := &kinchainv1.AnalyzeCaptureRequest{
		Capture: &kinchainv1.Capture{Tracks: []*kinchainv1.Track{{Segment: kinchainv1.Segment_SEGMENT_PELVIS, TimeS: []float64{0}}}},
		Options: &kinchainv1.AnalysisOptions{CutoffHz: f64(12), FilterOrder: 4, Speed: kinchainv1.SpeedDefinition_SPEED_DEFINITION_VERTICAL},
	}
	if !proto.Equal(got, want) {
		t.Errorf("differs:\n%s", diff(want, got))
	}
	_, err = decode.JSONRequest([]byte(`{"capture": {}, "options": {"filterOrder": 2.5}}`))
	var e *validate.Error
	if !errors.As(err, &e) || e.Field != "options.filter_order" || e.Reason != validate.ReasonMalformed {
		t.Errorf("got %v, want options.filter_order malformed", err)
	}
}

func TestJSONErrors(t *testing.T) {
	cases := []struct {
		name   string
		in     string
		field  string
		sample int
		line   int
		reason validate.Reason
	}{
		{"not an object", `[1, 2]`, "", -1, 1, validate.ReasonMalformed},
		{"empty", ``, "", -1, 1, validate.ReasonMalformed},
		{"syntax", "{\n\"club\": \"a\",,\n}", "", -1, 2, validate.ReasonMalformed},
		{"truncated", "{\"tracks\": [{\"timeS\": [0,\n1,", "tracks[0].time_s", -1, 2, validate.ReasonMalformed},
		{"trailing data", `{} {}`, "", -1, 1, validate.ReasonMalformed},
		{"unknown field", "{\"tracks\": [{},\n{\"quat\": []}]}", "tracks[1].quat", -1, 2, validate.ReasonMalformed},
		{"request as capture", `{"capture": {}}`, "capture", -1, 1, validate.ReasonMalformed},
		{"field twice", `{"club": "a", "club": "b"}`, "club", -1, 1, validate.ReasonMalformed},
		{"field twice by both names", `{"captureId": "a", "capture_id": "b"}`, "capture_id", -1, 1, validate.ReasonMalformed},
		{"string for array", `{"tracks": [{"qw": "1"}]}`, "tracks[0].qw", -1, 1, validate.ReasonMalformed},
		{"string in array", "{\"tracks\": [{\"qx\": [0,\n\n\"abc\"]}]}", "tracks[0].qx", 1, 3, validate.ReasonMalformed},
		{"bool in array", `{"tracks": [{"qx": [0, 1, true]}]}`, "tracks[0].qx", 2, 1, validate.ReasonMalformed},
		{"null in array", `{"tracks": [{"qx": [0, null]}]}`, "tracks[0].qx", 1, 1, validate.ReasonMalformed},
		{"object for number", `{"targetHeadingDeg": {}}`, "target_heading_deg", -1, 1, validate.ReasonMalformed},
		{"number overflow", `{"targetHeadingDeg": 1e999}`, "target_heading_deg", -1, 1, validate.ReasonMalformed},
		{"unknown enum name", `{"tracks": [{"segment": "SEGMENT_KNEE"}]}`, "tracks[0].segment", -1, 1, validate.ReasonMalformed},
		{"bool for enum", `{"tracks": [{"segment": true}]}`, "tracks[0].segment", -1, 1, validate.ReasonMalformed},
		{"fractional enum", `{"handedness": 1.5}`, "handedness", -1, 1, validate.ReasonMalformed},
		{"number for string", `{"club": 7}`, "club", -1, 1, validate.ReasonMalformed},
		{"array for message", `{"neutral": [0, 1]}`, "neutral", -1, 1, validate.ReasonMalformed},
		{"object for array", `{"tracks": {}}`, "tracks", -1, 1, validate.ReasonMalformed},
		{"array for map", `{"metadata": []}`, "metadata", -1, 1, validate.ReasonMalformed},
		{"number in map", `{"metadata": {"a": "b", "c": 1}}`, `metadata["c"]`, -1, 1, validate.ReasonMalformed},
		{"string in track list", `{"tracks": ["pelvis"]}`, "tracks[0]", -1, 1, validate.ReasonMalformed},
		{"invalid UTF-8", "{\"club\": \"\xff\"}", "", -1, 1, validate.ReasonMalformed},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			c, err := decode.JSON([]byte(tc.in))
			var e *validate.Error
			if !errors.As(err, &e) {
				t.Fatalf("got %v (%v), want a *validate.Error", err, c)
			}
			if e.Field != tc.field || e.Sample != tc.sample || e.Line != tc.line || e.Reason != tc.reason {
				t.Errorf("got field %q sample %d line %d reason %s (%v); want %q %d %d %s", e.Field, e.Sample, e.Line, e.Reason, err, tc.field, tc.sample, tc.line, tc.reason)
			}
		})
	}
}

// TestJSONTrackBomb: thousands of empty tracks in a few kilobytes are refused
// before protojson allocates them.
func TestJSONTrackBomb(t *testing.T) {
	in := `{"tracks": [` + strings.Repeat(`{},`, 5000) + `{}]}`
	_, err := decode.JSON([]byte(in))
	var e *validate.Error
	if !errors.As(err, &e) || e.Reason != validate.ReasonTooLarge || e.Field != "tracks" {
		t.Fatalf("got %v", err)
	}
	// Many samples in a body that also has many objects (limit lowered
	// through File); a body with few objects is left to validate.
	in = `{"tracks": [{"timeS": [` + strings.Repeat("0,", 99) + `0]}` + strings.Repeat(`,{}`, 100) + `]}`
	_, _, err = decode.File("x.json", []byte(in), validate.Limits{MaxSamples: 50})
	if !errors.As(err, &e) || e.Reason != validate.ReasonTooLarge || e.Field != "tracks[0].time_s" || e.Sample != 50 {
		t.Fatalf("got %v", err)
	}
}

// TestJSONWalkerAgreesWithProtojson: inputs protojson accepts in unusual
// spellings pass the walk too (the walk runs first on bodies with many
// objects, so it must not reject what protojson reads).
func TestJSONWalkerAgreesWithProtojson(t *testing.T) {
	pad := strings.Repeat(`{"segment": "SEGMENT_HEAD"},`, 10) // 10 objects; 4·16+16 = 80 would be the threshold
	in := `{"capture": {"metadata": {"a": "b"}, "handedness": null, "tracks": [` + pad + `
	  {"segment": 5, "timeS": [0, "0.5", 1e-3, -2E2, "Infinity"], "qw": null}]},
	 "options": {"filterOrder": "3", "cutoffHz": "12.5", "rateHz": 1e2, "includeSeries": true, "speed": 2,
	  "neutral": {"startS": "-1", "endS": 2}}}`
	// Push the object count over the walk threshold with extra neutral-free
	// padding inside metadata strings (braces in strings count too).
	in = strings.Replace(in, `"a": "b"`, `"a": "`+strings.Repeat("{", 100)+`"`, 1)
	r, err := decode.JSONRequest([]byte(in))
	if err != nil {
		t.Fatal(err)
	}
	if r.GetOptions().GetFilterOrder() != 3 || r.GetOptions().GetCutoffHz() != 12.5 || r.GetCapture().GetTracks()[10].GetTimeS()[1] != 0.5 {
		t.Errorf("decoded %v", r)
	}
}

func TestJSONRequestErrors(t *testing.T) {
	cases := []struct {
		in, field string
		sample    int
	}{
		{`{"options": {"filterOrder": "three"}}`, "options.filter_order", -1},
		{`{"options": {"filterOrder": true}}`, "options.filter_order", -1},
		{`{"options": {"filterOrder": 3000000000}}`, "options.filter_order", -1},
		{`{"options": {"cutoffHz": " 1"}}`, "options.cutoff_hz", -1},
		{`{"options": {"cutoffHz": [1]}}`, "options.cutoff_hz", -1},
		{`{"options": {"includeSeries": 1}}`, "options.include_series", -1},
		{`{"options": {"speed": "FAST"}}`, "options.speed", -1},
		{`{"options": {"speed": 99999999999}}`, "options.speed", -1},
		{`{"capture": {"tracks": [{"timeS": [0, {}]}]}}`, "capture.tracks[0].time_s", 1},
		{`{"capture": {"tracks": [{"timeS": [0, [1]]}]}}`, "capture.tracks[0].time_s", 1},
		{`{"capture": {"tracks": [{"segment": "SEGMENT_PELVIS"}, 7]}}`, "capture.tracks[1]", -1},
		{`{"capture": {"metadata": {"k": null}}}`, `capture.metadata["k"]`, -1},
		{`{"capture": {"metadata": {"k": "v"`, "capture.metadata", -1},
		{`{"capture": {"neutral": {"startS": 0`, "capture.neutral", -1},
		{`{"capture": {"tracks": [`, "capture.tracks", -1},
		{`{"capture": `, "capture", -1},
	}
	for _, tc := range cases {
		_, err := decode.JSONRequest([]byte(tc.in))
		var e *validate.Error
		if !errors.As(err, &e) || e.Field != tc.field || e.Sample != tc.sample || e.Reason != validate.ReasonMalformed {
			t.Errorf("%s: got %v, want %s[%d] malformed", tc.in, err, tc.field, tc.sample)
		}
	}
}
