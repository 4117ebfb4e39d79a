package decode_test

// The generator of testdata/bad (and testdata/good/capture.pb). Run
//
//	go test ./internal/decode -run TestCorpusFiles -update
//
// to rewrite the files; without -update the test checks that the committed
// files are exactly what this code writes, so the binary files stay
// reproducible. The expected outcomes are not computed here: they are in
// testdata/bad/cases.tsv, worked out by hand from the descriptions below.

import (
	"bytes"
	"flag"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"google.golang.org/protobuf/encoding/protowire"
	"google.golang.org/protobuf/proto"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
)

var update = flag.Bool("update", false, "rewrite the generated files in testdata/bad and testdata/good")

const (
	badDir  = "../../testdata/bad"
	goodDir = "../../testdata/good"
)

const qHeader = "time_s,segment,qw,qx,qy,qz"

func ftoa(v float64) string { return strconv.FormatFloat(v, 'g', -1, 64) }

// rows returns n CSV rows of segment seg at rate Hz from t0 with the
// identity quaternion; edit, when non-nil, may change the cells of row k
// (cells[0] is time_s, cells[1] the segment, then qw qx qy qz and any extra
// columns given).
func rows(seg string, n int, rate, t0 float64, extra []string, edit func(k int, cells []string)) []string {
	out := make([]string, n)
	for k := range n {
		cells := append([]string{ftoa(t0 + float64(k)/rate), seg, "1", "0", "0", "0"}, extra...)
		if edit != nil {
			edit(k, cells)
		}
		out[k] = strings.Join(cells, ",")
	}
	return out
}

func lines(parts ...any) []byte {
	var b bytes.Buffer
	for _, p := range parts {
		switch v := p.(type) {
		case string:
			b.WriteString(v)
			b.WriteByte('\n')
		case []string:
			for _, s := range v {
				b.WriteString(s)
				b.WriteByte('\n')
			}
		}
	}
	return b.Bytes()
}

// interleave merges row lists a and b alternately (a first).
func interleave(a, b []string) []string {
	var out []string
	for k := range max(len(a), len(b)) {
		if k < len(a) {
			out = append(out, a[k])
		}
		if k < len(b) {
			out = append(out, b[k])
		}
	}
	return out
}

// jarr returns a JSON array of n entries, entry k given by f.
func jarr(n int, f func(k int) string) string {
	s := make([]string, n)
	for k := range s {
		s[k] = f(k)
	}
	return "[" + strings.Join(s, ", ") + "]"
}

func konst(v string) func(int) string { return func(int) string { return v } }

// jtrack returns a protojson track of n identity-quaternion samples at
// 100 Hz; over replaces or adds arrays (name → JSON value).
func jtrack(seg string, n int, over map[string]string) string {
	fields := []string{"timeS", "qw", "qx", "qy", "qz"}
	vals := map[string]string{
		"timeS": jarr(n, func(k int) string { return ftoa(float64(k) / 100) }),
		"qw":    jarr(n, konst("1")), "qx": jarr(n, konst("0")), "qy": jarr(n, konst("0")), "qz": jarr(n, konst("0")),
	}
	for _, k := range []string{"gx", "gy", "gz", "ax", "ay", "az", "mounting"} {
		if _, ok := over[k]; ok {
			fields = append(fields, k)
		}
	}
	for k, v := range over {
		vals[k] = v
	}
	var b strings.Builder
	b.WriteString("    {\n      \"segment\": " + seg)
	for _, f := range fields {
		if v := vals[f]; v != "" {
			b.WriteString(",\n      \"" + f + "\": " + v)
		}
	}
	b.WriteString("\n    }")
	return b.String()
}

func jcapture(head string, tracks ...string) []byte {
	s := "{\n"
	if head != "" {
		s += "  " + head + ",\n"
	}
	s += "  \"tracks\": [\n" + strings.Join(tracks, ",\n") + "\n  ]\n}\n"
	return []byte(s)
}

// ptrack returns a track of n identity-quaternion samples at rate Hz.
func ptrack(seg kinchainv1.Segment, n int, rate float64) *kinchainv1.Track {
	t := &kinchainv1.Track{Segment: seg}
	for k := range n {
		t.TimeS = append(t.TimeS, float64(k)/rate)
		t.Qw, t.Qx, t.Qy, t.Qz = append(t.Qw, 1), append(t.Qx, 0), append(t.Qy, 0), append(t.Qz, 0)
	}
	return t
}

func marshal(c *kinchainv1.Capture) []byte {
	b, err := proto.MarshalOptions{Deterministic: true}.Marshal(c)
	if err != nil {
		panic(err)
	}
	return b
}

func tagged(n protowire.Number, t protowire.Type) []byte { return protowire.AppendTag(nil, n, t) }

// goodCapture is the capture of testdata/good, written out by formula: a
// pelvis at 100 Hz turning about z through quaternions with exact decimal
// components, and a club at 200 Hz with gyroscope readings.
func goodCapture() *kinchainv1.Capture {
	h := 15.0
	c := &kinchainv1.Capture{
		CaptureId:        "good-1",
		Handedness:       kinchainv1.Handedness_HANDEDNESS_RIGHT,
		Club:             "7-iron",
		TargetHeadingDeg: &h,
		Neutral:          &kinchainv1.TimeWindow{StartS: 0, EndS: 0.05},
		Metadata:         map[string]string{"site": "indoor bay 2"},
	}
	// (w, z) pairs on the unit circle: 3-4-5 and 7-24-25 triangles.
	pq := [][2]float64{{1, 0}, {0.96, 0.28}, {0.8, 0.6}, {0.6, 0.8}}
	p := &kinchainv1.Track{Segment: kinchainv1.Segment_SEGMENT_PELVIS}
	for k := range 16 {
		p.TimeS = append(p.TimeS, float64(k)/100)
		q := pq[k%4]
		p.Qw, p.Qx, p.Qy, p.Qz = append(p.Qw, q[0]), append(p.Qx, 0), append(p.Qy, 0), append(p.Qz, q[1])
	}
	cl := &kinchainv1.Track{Segment: kinchainv1.Segment_SEGMENT_CLUB, Mounting: &kinchainv1.Quaternion{W: 0.8, Y: 0.6}}
	cq := [][4]float64{{0.5, 0.5, 0.5, 0.5}, {0.5, -0.5, 0.5, -0.5}}
	for k := range 32 {
		cl.TimeS = append(cl.TimeS, float64(k)/200)
		q := cq[k%2]
		cl.Qw, cl.Qx, cl.Qy, cl.Qz = append(cl.Qw, q[0]), append(cl.Qx, q[1]), append(cl.Qy, q[2]), append(cl.Qz, q[3])
		cl.Gx, cl.Gy, cl.Gz = append(cl.Gx, float64(k)/4), append(cl.Gy, -float64(k)/8), append(cl.Gz, 3)
	}
	c.Tracks = []*kinchainv1.Track{p, cl}
	return c
}

// corpus returns every generated file, by path relative to the package.
func corpus() map[string][]byte {
	bad := map[string][]byte{}
	q20 := rows("pelvis", 20, 100, 0, nil, nil)
	edit := func(n int, extra []string, f func(k int, c []string)) []string {
		return rows("pelvis", n, 100, 0, extra, f)
	}
	at := func(i int, f func(c []string)) func(int, []string) {
		return func(k int, c []string) {
			if k == i {
				f(c)
			}
		}
	}

	// --- CSV: header and structure -------------------------------------
	bad["csv_unknown_column_deg.csv"] = lines("# units: gyroscope in degrees per second", qHeader+",gx_deg_per_s,gy,gz", edit(20, []string{"0", "0", "0"}, nil))
	bad["csv_missing_time.csv"] = lines("segment,qw,qx,qy,qz", "pelvis,1,0,0,0")
	bad["csv_no_segment.csv"] = lines("time_s,qw,qx,qy,qz", "0,1,0,0,0")
	bad["csv_partial_quat_header.csv"] = lines("time_s,segment,qw,qx,qy", "0,pelvis,1,0,0")
	bad["csv_partial_gyro_header.csv"] = lines(qHeader+",gx,gy", "0,pelvis,1,0,0,0,0,0")
	bad["csv_position_only.csv"] = lines("time_s,segment,px,py,pz", "0,pelvis,0,0,1")
	bad["csv_duplicate_column.csv"] = lines(qHeader+",time_s", "0,pelvis,1,0,0,0,0")
	bad["csv_quoted_header.csv"] = lines(`"time_s","segment","qw","qx","qy","qz"`, "0,pelvis,1,0,0,0")
	bad["csv_header_missing.csv"] = lines("# exported without a header", q20)
	bad["csv_metadata_after_data.csv"] = lines(qHeader, q20, "# handedness: left")
	bad["csv_segment_meta_conflict.csv"] = lines("# segment: club", qHeader, q20)
	bad["csv_reserved_key_case.csv"] = lines("# Handedness: left", qHeader, q20)
	bad["csv_bad_handedness.csv"] = lines("# handedness: ambidextrous", qHeader, q20)
	bad["csv_bad_neutral.csv"] = lines("# neutral: 0.5", qHeader, q20)
	bad["csv_mounting_unknown_segment.csv"] = lines("# mounting.left_hand: 1 0 0 0", qHeader, q20)
	bad["csv_header_only.csv"] = lines("# club: driver", qHeader)

	// --- CSV: rows ------------------------------------------------------
	bad["csv_bad_number.csv"] = lines(qHeader, edit(20, nil, at(4, func(c []string) { c[3] = "0.0.1" })))
	short := edit(20, nil, nil)
	short[7] = "0.07,pelvis,1,0,0"
	bad["csv_short_row.csv"] = lines(qHeader, short)
	long := edit(20, nil, nil)
	long[2] += ",0"
	bad["csv_long_row.csv"] = lines(qHeader, long)
	bad["csv_unknown_segment.csv"] = lines(qHeader, edit(20, nil, at(9, func(c []string) { c[1] = "pelvic" })))
	bad["csv_uppercase_segment.csv"] = lines(qHeader, rows("Pelvis", 20, 100, 0, nil, nil))
	bad["csv_empty_cell.csv"] = lines(qHeader, edit(20, nil, at(9, func(c []string) { c[3] = "" })))
	bad["csv_partial_gyro_cells.csv"] = lines(qHeader+",gx,gy,gz", rows("club", 20, 100, 0, []string{"0.1", "0.2", ""}, nil))
	bad["csv_gyro_stops.csv"] = lines(qHeader+",gx,gy,gz", rows("club", 20, 100, 0, []string{"0.1", "0.2", "0.3"}, func(k int, c []string) {
		if k >= 12 {
			c[6], c[7], c[8] = "", "", ""
		}
	}))

	// --- CSV: values (found by validate, with the line) ----------------
	bad["csv_nan.csv"] = lines(qHeader, edit(20, nil, at(7, func(c []string) { c[4] = "NaN" })))
	bad["csv_inf_time.csv"] = lines(qHeader, edit(20, nil, at(3, func(c []string) { c[0] = "inf" })))
	bad["csv_zero_quaternion.csv"] = lines(qHeader, edit(20, nil, at(12, func(c []string) { c[2] = "0" })))
	bad["csv_not_unit.csv"] = lines(qHeader, edit(20, nil, at(4, func(c []string) { c[3] = "0.5" })))
	bad["csv_raw_int_quaternion.csv"] = lines(qHeader, edit(20, nil, func(k int, c []string) { c[2] = "16384" }))
	bad["csv_time_backwards.csv"] = lines(qHeader, edit(20, nil, at(10, func(c []string) { c[0] = "0.05" })))
	bad["csv_duplicate_time.csv"] = lines(qHeader, edit(20, nil, at(6, func(c []string) { c[0] = "0.05" })))
	thorax := rows("thorax", 20, 100, 0, nil, func(k int, c []string) {
		if k == 9 {
			c[0] = "0.075"
		}
	})
	bad["csv_interleaved_backwards.csv"] = lines(qHeader, interleave(q20, thorax))
	bad["csv_too_few_samples.csv"] = lines(qHeader, edit(5, nil, nil))
	bad["csv_single_sample.csv"] = lines(qHeader, edit(1, nil, nil))
	bad["csv_rate_too_low.csv"] = lines(qHeader, rows("pelvis", 20, 1, 0, nil, nil))
	bad["csv_rate_too_high.csv"] = lines(qHeader, rows("pelvis", 20, 1e6, 0, nil, nil))
	bad["csv_neutral_reversed.csv"] = lines("# neutral: 0.15:0.05", qHeader, q20)
	bad["csv_neutral_outside.csv"] = lines("# neutral: 0:5", qHeader, q20)
	bad["csv_zero_mounting.csv"] = lines("# mounting.pelvis: 0 0 0 0", qHeader, q20)
	// Gyroscope z written in °/s: 60 °/s per sample, past 200 at sample 4.
	bad["csv_gyro_degrees.csv"] = lines(qHeader+",gx,gy,gz", rows("club", 20, 100, 0, []string{"0", "0", ""}, func(k int, c []string) { c[8] = strconv.Itoa(60 * k) }))
	bad["csv_accel_in_g.csv"] = lines(qHeader+",ax,ay,az", rows("pelvis", 20, 100, 0, []string{"0.01", "-0.02", "1.01"}, nil))

	// --- CSV: sizes, checked with lowered limits (see cases.tsv) --------
	bad["csv_too_many_samples.csv"] = lines(qHeader, edit(40, nil, nil))
	bad["csv_too_many_bytes.csv"] = lines(qHeader, edit(20, nil, nil))
	bad["csv_too_many_segments.csv"] = lines(qHeader, "0,pelvis,1,0,0,0", "0,thorax,1,0,0,0", "0,club,1,0,0,0")

	// --- JSON -----------------------------------------------------------
	p20 := func(over map[string]string) string { return jtrack(`"SEGMENT_PELVIS"`, 20, over) }
	full := jcapture(`"captureId": "cut"`, p20(nil))
	bad["json_truncated.json"] = full[:bytes.Index(full, []byte(`"qx"`))+20]
	bad["json_not_object.json"] = []byte("[\n  {\"segment\": \"SEGMENT_PELVIS\"}\n]\n")
	bad["json_wrong_type_array.json"] = jcapture("", p20(map[string]string{"qw": `"1, 1, 1"`}))
	bad["json_string_in_array.json"] = jcapture("", p20(map[string]string{"qx": jarr(20, func(k int) string {
		if k == 2 {
			return `"zero"`
		}
		return "0"
	})}))
	bad["json_bool_segment.json"] = jcapture("", jtrack("true", 20, nil))
	bad["json_unknown_field.json"] = jcapture("", p20(map[string]string{"gx": jarr(20, konst("0")), "gy": jarr(20, konst("0")), "gz": jarr(20, konst("0"))}))
	bad["json_unknown_field.json"] = bytes.Replace(bad["json_unknown_field.json"], []byte(`"gz"`), []byte(`"gz_deg_per_s"`), 1)
	bad["json_unknown_segment_name.json"] = jcapture("", jtrack(`"SEGMENT_KNEE"`, 20, nil))
	bad["json_request_as_capture.json"] = []byte("{\n  \"capture\": {\n    \"tracks\": []\n  }\n}\n")
	bad["json_nan.json"] = jcapture("", p20(map[string]string{"qw": jarr(20, func(k int) string {
		if k == 13 {
			return `"NaN"`
		}
		return "1"
	})}))
	bad["json_infinity_time.json"] = jcapture("", p20(map[string]string{"timeS": jarr(20, func(k int) string {
		if k == 19 {
			return `"Infinity"`
		}
		return ftoa(float64(k) / 100)
	})}))
	bad["json_segment_number.json"] = jcapture("", jtrack("42", 20, nil))
	bad["json_segment_unspecified.json"] = jcapture("", jtrack(`"SEGMENT_UNSPECIFIED"`, 20, nil))
	bad["json_duplicate_segment.json"] = jcapture("", p20(nil), p20(nil))
	bad["json_length_mismatch.json"] = jcapture("", p20(map[string]string{"qy": jarr(19, konst("0"))}))
	bad["json_no_tracks.json"] = []byte("{\n  \"captureId\": \"nothing\",\n  \"tracks\": []\n}\n")
	bad["json_empty_track.json"] = jcapture("", "    {\"segment\": \"SEGMENT_PELVIS\"}")
	raw := map[string]string{"qw": "", "qx": "", "qy": "", "qz": "", "gx": jarr(20, konst("0.1")), "gy": jarr(20, konst("0")), "gz": jarr(20, konst("0")), "ax": jarr(20, konst("0")), "ay": jarr(20, konst("0"))}
	bad["json_partial_accel.json"] = jcapture("", p20(raw))
	raw = map[string]string{"qw": "", "qx": "", "qy": "", "qz": "", "gx": jarr(20, konst("0.1")), "gy": jarr(20, konst("0")), "gz": jarr(20, konst("0"))}
	bad["json_gyro_only.json"] = jcapture("", p20(raw))
	bad["json_heading_inf.json"] = jcapture(`"targetHeadingDeg": "-Infinity"`, p20(nil))
	bad["json_handedness_number.json"] = jcapture(`"handedness": 7`, p20(nil))
	bad["json_mounting_zero.json"] = jcapture("", p20(map[string]string{"mounting": `{"w": 0, "x": 0, "y": 0, "z": 0}`}))
	bad["json_too_many_tracks.json"] = jcapture("", strings.Repeat(`    {"segment": "SEGMENT_HEAD"},`+"\n", 16)+`    {"segment": "SEGMENT_HEAD"}`)
	bad["json_track_bomb.json"] = []byte("{\"tracks\": [" + strings.Repeat("{},", 2999) + "{}]}\n")
	bad["json_gyro_degrees.json"] = jcapture("", p20(map[string]string{"gx": jarr(20, konst("0")), "gy": jarr(20, func(k int) string { return strconv.Itoa(-25 * k) }), "gz": jarr(20, konst("0")),
		"ax": jarr(20, konst("0")), "ay": jarr(20, konst("0")), "az": jarr(20, konst("9.81"))}))

	// Requests (decoded with JSONRequest, checked with validate.Request).
	req := func(opts string, track string) []byte {
		return []byte("{\n  \"capture\": {\n  \"tracks\": [\n" + track + "\n  ]\n  },\n  \"options\": " + opts + "\n}\n")
	}
	bad["request_bad_cutoff.json"] = req(`{"cutoffHz": -5}`, p20(nil))
	bad["request_filter_order.json"] = req(`{"filterOrder": 9}`, p20(nil))
	bad["request_rate.json"] = req(`{"rateHz": 5}`, p20(nil))
	bad["request_speed_enum.json"] = req(`{"speed": 9}`, p20(nil))
	bad["request_neutral_outside.json"] = req(`{"neutral": {"startS": 0.1, "endS": 0.3}}`, p20(nil))
	bad["request_capture_error.json"] = req(`{}`, p20(map[string]string{"qw": jarr(20, func(k int) string {
		if k == 5 {
			return "0"
		}
		return "1"
	})}))
	bad["request_wrong_type.json"] = req(`{"includeSeries": "yes"}`, p20(nil))

	// --- Binary protobuf ------------------------------------------------
	one := &kinchainv1.Capture{CaptureId: "pb", Tracks: []*kinchainv1.Track{ptrack(kinchainv1.Segment_SEGMENT_PELVIS, 20, 100)}}
	ok := marshal(one)
	bad["pb_truncated.pb"] = ok[:len(ok)-100]
	seg := protowire.AppendVarint(tagged(1, protowire.VarintType), 1)
	lie := append(append(tagged(2, protowire.BytesType), protowire.AppendVarint(nil, 1<<30)...), make([]byte, 16)...)
	bad["pb_lying_length.pb"] = protowire.AppendBytes(tagged(4, protowire.BytesType), append(seg, lie...))
	odd := protowire.AppendBytes(tagged(4, protowire.BytesType), append(seg, protowire.AppendBytes(tagged(4, protowire.BytesType), make([]byte, 20))...))
	bad["pb_packed_odd.pb"] = odd
	bad["pb_wrong_wiretype.pb"] = protowire.AppendBytes(tagged(4, protowire.BytesType), append(seg, protowire.AppendVarint(tagged(2, protowire.VarintType), 5)...))
	c := proto.Clone(one).(*kinchainv1.Capture)
	c.Tracks[0].Qz[11] = math.NaN()
	bad["pb_nan.pb"] = marshal(c)
	c = proto.Clone(one).(*kinchainv1.Capture)
	c.Tracks[0].Qw[0] = 0
	bad["pb_zero_quaternion.pb"] = marshal(c)
	c = &kinchainv1.Capture{Tracks: []*kinchainv1.Track{ptrack(kinchainv1.Segment_SEGMENT_PELVIS, 20, 100), ptrack(kinchainv1.Segment_SEGMENT_THORAX, 20, 100)}}
	c.Tracks[1].TimeS[15] = 0.1
	bad["pb_time_backwards.pb"] = marshal(c)
	c = proto.Clone(one).(*kinchainv1.Capture)
	c.Tracks[0].Segment = 99
	bad["pb_unknown_segment.pb"] = marshal(c)
	c.Tracks[0].Segment = -1
	bad["pb_negative_segment.pb"] = marshal(c)
	c = proto.Clone(one).(*kinchainv1.Capture)
	c.Tracks[0].Qw = c.Tracks[0].Qw[:19]
	bad["pb_length_mismatch.pb"] = marshal(c)
	bad["pb_track_bomb.pb"] = bytes.Repeat([]byte{0x22, 0x00}, 1000)
	c = &kinchainv1.Capture{Tracks: []*kinchainv1.Track{ptrack(kinchainv1.Segment_SEGMENT_PELVIS, 64, 100), ptrack(kinchainv1.Segment_SEGMENT_CLUB, 64, 100)}}
	bad["pb_many_samples.pb"] = marshal(c)
	bad["pb_invalid_utf8.pb"] = append(protowire.AppendBytes(tagged(1, protowire.BytesType), []byte("take\xff2")), ok[len(protowire.AppendString(tagged(1, protowire.BytesType), "pb")):]...)
	bad["pb_garbage.pb"] = []byte{0x0f, 0xff, 0xde, 0xad, 0xbe, 0xef}
	bad["pb_empty.pb"] = []byte{}
	c = proto.Clone(one).(*kinchainv1.Capture)
	c.Tracks[0].Gx, c.Tracks[0].Gy, c.Tracks[0].Gz = make([]float64, 20), make([]float64, 20), make([]float64, 20)
	c.Tracks[0].Ax, c.Tracks[0].Ay, c.Tracks[0].Az = make([]float64, 20), make([]float64, 20), make([]float64, 20)
	for k := range 20 {
		c.Tracks[0].Az[k] = 9.81
		c.Tracks[0].Gx[k] = 30 * float64(k) // °/s, past 200 at sample 7
	}
	bad["pb_gyro_degrees.pb"] = marshal(c)
	c = proto.Clone(one).(*kinchainv1.Capture)
	c.Tracks = append(c.Tracks, &kinchainv1.Track{Segment: kinchainv1.Segment_SEGMENT_CLUB})
	bad["pb_empty_track.pb"] = marshal(c)

	out := map[string][]byte{}
	for name, b := range bad {
		out[filepath.Join(badDir, name)] = b
	}
	out[filepath.Join(goodDir, "capture.pb")] = marshal(goodCapture())
	return out
}

func TestCorpusFiles(t *testing.T) {
	for path, want := range corpus() {
		if *update {
			if err := os.WriteFile(path, want, 0o644); err != nil {
				t.Fatal(err)
			}
			continue
		}
		got, err := os.ReadFile(path)
		if err != nil {
			t.Errorf("%v (run with -update to write it)", err)
			continue
		}
		if !bytes.Equal(got, want) {
			t.Errorf("%s differs from what the generator writes (run with -update)", path)
		}
	}
	if *update {
		fmt.Println("wrote", len(corpus()), "files")
	}
}
