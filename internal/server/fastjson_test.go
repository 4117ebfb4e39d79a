package server

import (
	"math"
	"testing"

	"google.golang.org/protobuf/encoding/protojson"
	"google.golang.org/protobuf/proto"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
)

// The reference for decodeRequestJSON is protojson itself (the
// google.golang.org/protobuf implementation of the proto3 JSON mapping):
// on every input both must agree on success or failure, and on success
// give equal messages.

var unmarshalOpts = protojson.UnmarshalOptions{}

// sampleRequest is a request using most fields; extreme adds values at
// the edges of float64 (huge, denormal, negative zero) to the IMU track.
func sampleRequest(extreme bool) *kinchainv1.AnalyzeCaptureRequest {
	cut := 7.5
	heading := 12.0
	tr := func(seg kinchainv1.Segment, n int, imu bool) *kinchainv1.Track {
		t := &kinchainv1.Track{Segment: seg, Mounting: &kinchainv1.Quaternion{W: 1, Z: 1e-3}}
		for i := 0; i < n; i++ {
			x := float64(i)
			t.TimeS = append(t.TimeS, x/1000+1e-9)
			t.Qw = append(t.Qw, math.Cos(x/50))
			t.Qx = append(t.Qx, -math.Sin(x/50)*1e-7)
			t.Qy = append(t.Qy, 0)
			t.Qz = append(t.Qz, math.Sin(x/50)*123456.789)
			switch {
			case imu && extreme:
				t.Gx, t.Gy, t.Gz = append(t.Gx, x), append(t.Gy, -x*1e300), append(t.Gz, 5e-324)
				t.Ax, t.Ay, t.Az = append(t.Ax, 9.81), append(t.Ay, math.Copysign(0, -1)), append(t.Az, 1e21)
			case imu:
				t.Gx, t.Gy, t.Gz = append(t.Gx, math.Sin(x/30)), append(t.Gy, -math.Cos(x/40)*3), append(t.Gz, x/7)
				t.Ax, t.Ay, t.Az = append(t.Ax, 9.81+math.Sin(x)), append(t.Ay, -0.25), append(t.Az, 1/(x+1))
			}
		}
		return t
	}
	return &kinchainv1.AnalyzeCaptureRequest{
		Capture: &kinchainv1.Capture{
			CaptureId: "fast \"json\" ✓", Handedness: kinchainv1.Handedness_HANDEDNESS_LEFT, Club: "7-iron",
			Tracks:           []*kinchainv1.Track{tr(kinchainv1.Segment_SEGMENT_PELVIS, 40, false), tr(kinchainv1.Segment_SEGMENT_CLUB, 25, true), {Segment: kinchainv1.Segment_SEGMENT_HEAD}},
			Neutral:          &kinchainv1.TimeWindow{StartS: 0, EndS: 0.01},
			TargetHeadingDeg: &heading,
			Metadata:         map[string]string{"time_s": "not an array", "session": "a"},
		},
		Options: &kinchainv1.AnalysisOptions{CutoffHz: &cut, Speed: kinchainv1.SpeedDefinition_SPEED_DEFINITION_VERTICAL},
	}
}

// fastCases are inputs; fast says whether the fast path must take them.
var fastCases = func() []struct {
	name, json string
	fast       bool
} {
	r := sampleRequest(true)
	protoNames, _ := protojson.MarshalOptions{UseProtoNames: true}.Marshal(r)
	jsonNames, _ := protojson.Marshal(r)
	indented, _ := protojson.MarshalOptions{Multiline: true, Indent: "\t"}.Marshal(r)
	return []struct {
		name, json string
		fast       bool
	}{
		{"proto names", string(protoNames), true},
		{"json names", string(jsonNames), true},
		{"indented", string(indented), true},
		{"empty tracks", `{"capture": {"tracks": []}}`, true},
		{"empty track", `{"capture": {"tracks": [{}]}}`, true},
		{"spaces", " \n{ \"capture\" : { \"tracks\" : [ { \"segment\" : \"SEGMENT_PELVIS\" , \"qw\" : [ 1 , 2e-3 , -0 ] } ] } } \n", true},
		{"numeric enum", `{"capture": {"tracks": [{"segment": 2, "time_s": [0, 0.5]}]}}`, true},
		{"empty array", `{"capture": {"tracks": [{"time_s": []}]}}`, true},
		{"no capture", `{"options": {"cutoff_hz": 3}}`, false},
		{"empty object", `{}`, false},
		{"capture null", `{"capture": null}`, false},
		{"tracks null", `{"capture": {"tracks": null}}`, false},
		{"tracks object", `{"capture": {"tracks": {}}}`, false},
		{"array null", `{"capture": {"tracks": [{"qw": null}]}}`, false},
		{"NaN string", `{"capture": {"tracks": [{"qw": [1, "NaN", "Infinity", "-Infinity"]}]}}`, false},
		{"quoted number", `{"capture": {"tracks": [{"qw": ["1.5"]}]}}`, false},
		{"null element", `{"capture": {"tracks": [{"qw": [1, null]}]}}`, false},
		{"leading zero", `{"capture": {"tracks": [{"qw": [01]}]}}`, false},
		{"plus sign", `{"capture": {"tracks": [{"qw": [+1]}]}}`, false},
		{"bare dot", `{"capture": {"tracks": [{"qw": [.5]}]}}`, false},
		{"trailing dot", `{"capture": {"tracks": [{"qw": [1.]}]}}`, false},
		{"hex", `{"capture": {"tracks": [{"qw": [0x10]}]}}`, false},
		{"Inf literal", `{"capture": {"tracks": [{"qw": [Inf]}]}}`, false},
		{"overflow", `{"capture": {"tracks": [{"qw": [1e400]}]}}`, false},
		{"underflow", `{"capture": {"tracks": [{"qw": [1e-400]}]}}`, true},
		{"trailing comma", `{"capture": {"tracks": [{"qw": [1,]}]}}`, false},
		{"trailing comma tracks", `{"capture": {"tracks": [{},]}}`, false},
		{"missing comma", `{"capture": {"tracks": [{"qw": [1 2]}]}}`, false},
		{"duplicate array", `{"capture": {"tracks": [{"time_s": [1], "timeS": [2]}]}}`, false},
		{"duplicate array same name", `{"capture": {"tracks": [{"qw": [1], "qw": [2]}]}}`, false},
		{"duplicate scalar", `{"capture": {"tracks": [{"segment": 1, "segment": 2}]}}`, false},
		{"duplicate capture", `{"capture": {"tracks": []}, "capture": {"tracks": []}}`, false},
		{"duplicate tracks", `{"capture": {"tracks": [], "tracks": []}}`, false},
		{"escaped key", `{"capture": {"tracks": [{"time\u005fs": [1], "timeS": [2]}]}}`, false},
		{"escaped key top", `{"\u0063apture": {"tracks": [{"qw": [1]}]}}`, false},
		{"unknown track field", `{"capture": {"tracks": [{"qv": [1]}]}}`, false},
		{"unknown top field", `{"capture": {"tracks": [{"qw": [1]}]}, "extra": 1}`, false},
		{"string array", `{"capture": {"tracks": [{"qw": "1"}]}}`, false},
		{"object in array", `{"capture": {"tracks": [{"qw": [{}]}]}}`, false},
		{"mismatched", `{"capture": {"tracks": [{"qw": [1}]}}`, false},
		{"mismatched mounting", `{"capture": {"tracks": [{"mounting": {"w": 1]}]}}`, false},
		{"trailing garbage", `{"capture": {"tracks": [{"qw": [1]}]}} x`, false},
		{"truncated", `{"capture": {"tracks": [{"qw": [1`, false},
		{"not an object", `[1, 2]`, false},
		{"empty", ``, false},
		{"bad segment", `{"capture": {"tracks": [{"segment": "SEGMENT_TAIL", "qw": [1]}]}}`, false},
		{"string with brackets", `{"capture": {"capture_id": "]}[{\"", "tracks": [{"qw": [1]}]}}`, true},
	}
}()

func refDecode(b []byte) (*kinchainv1.AnalyzeCaptureRequest, error) {
	m := &kinchainv1.AnalyzeCaptureRequest{}
	return m, unmarshalOpts.Unmarshal(b, m)
}

// agree checks decodeRequestJSON against protojson on one input.
func agree(t *testing.T, in []byte) {
	t.Helper()
	want, wantErr := refDecode(in)
	got := &kinchainv1.AnalyzeCaptureRequest{}
	gotErr := decodeRequestJSON(in, unmarshalOpts, got)
	if (gotErr == nil) != (wantErr == nil) {
		t.Fatalf("%q: error %v, protojson %v", in, gotErr, wantErr)
	}
	if wantErr != nil {
		if gotErr.Error() != wantErr.Error() {
			t.Errorf("%q: error %q, protojson's %q", in, gotErr, wantErr)
		}
		return
	}
	if !proto.Equal(got, want) {
		t.Errorf("%q: decoded\n%v\nprotojson\n%v", in, got, want)
	}
}

func TestDecodeRequestJSON(t *testing.T) {
	for _, c := range fastCases {
		t.Run(c.name, func(t *testing.T) {
			agree(t, []byte(c.json))
			if fast := fastRequest([]byte(c.json), unmarshalOpts, &kinchainv1.AnalyzeCaptureRequest{}); fast != c.fast {
				t.Errorf("fast path taken = %v, want %v", fast, c.fast)
			}
		})
	}
}

func FuzzDecodeRequestJSON(f *testing.F) {
	for _, c := range fastCases {
		f.Add([]byte(c.json))
	}
	f.Fuzz(func(t *testing.T, in []byte) {
		agree(t, in)
	})
}

// BenchmarkDecodeRequestJSON compares the fast path with protojson on a
// request of two tracks of ~20,000 samples with ordinary values.
func BenchmarkDecodeRequestJSON(b *testing.B) {
	r := sampleRequest(false)
	for _, tr := range r.Capture.Tracks {
		for len(tr.TimeS) > 0 && len(tr.TimeS) < 15000 {
			tr.TimeS = append(tr.TimeS, tr.TimeS...)
			tr.Qw, tr.Qx, tr.Qy, tr.Qz = append(tr.Qw, tr.Qw...), append(tr.Qx, tr.Qx...), append(tr.Qy, tr.Qy...), append(tr.Qz, tr.Qz...)
			tr.Gx, tr.Gy, tr.Gz = append(tr.Gx, tr.Gx...), append(tr.Gy, tr.Gy...), append(tr.Gz, tr.Gz...)
			tr.Ax, tr.Ay, tr.Az = append(tr.Ax, tr.Ax...), append(tr.Ay, tr.Ay...), append(tr.Az, tr.Az...)
		}
	}
	in, _ := protojson.MarshalOptions{UseProtoNames: true}.Marshal(r)
	b.Run("fast", func(b *testing.B) {
		b.SetBytes(int64(len(in)))
		for b.Loop() {
			if err := decodeRequestJSON(in, unmarshalOpts, &kinchainv1.AnalyzeCaptureRequest{}); err != nil {
				b.Fatal(err)
			}
		}
	})
	b.Run("protojson", func(b *testing.B) {
		b.SetBytes(int64(len(in)))
		for b.Loop() {
			if _, err := refDecode(in); err != nil {
				b.Fatal(err)
			}
		}
	})
}
