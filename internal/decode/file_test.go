package decode_test

import (
	"errors"
	"math"
	"testing"

	"google.golang.org/protobuf/proto"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/decode"
	"github.com/kinchain/kinchain/internal/validate"
)

func TestDetect(t *testing.T) {
	pb, err := proto.Marshal(&kinchainv1.Capture{CaptureId: "a", Tracks: []*kinchainv1.Track{{Segment: 1, TimeS: []float64{0, 0.01}}}})
	if err != nil {
		t.Fatal(err)
	}
	tracksFirst, _ := proto.Marshal(&kinchainv1.Capture{Tracks: []*kinchainv1.Track{{Segment: 1, TimeS: []float64{0.5}}}})
	long := make([]byte, 0, 600)
	for len(long) < 511 {
		long = append(long, "time_s,segment,qw,qx,qy,qz\n"...)
	}
	long = long[:511]
	long = append(long, "é"...) // a two-byte rune cut by the 512-byte window
	cases := []struct {
		name string
		file string
		b    []byte
		want decode.Format
	}{
		{"csv by name", "a.CSV", []byte("{"), decode.FormatCSV},
		{"json by name", "a.json", []byte("time_s"), decode.FormatJSON},
		{"pb by name", "a.pb", []byte("{}"), decode.FormatProto},
		{"bin by name", "x.bin", nil, decode.FormatProto},
		{"binpb by name", "x.binpb", nil, decode.FormatProto},
		{"json by content", "-", []byte("\xef\xbb\xbf \n {\"tracks\": []}"), decode.FormatJSON},
		{"csv by content", "stdin", []byte("# club: 7-iron\ntime_s,segment\n"), decode.FormatCSV},
		{"csv with a cut rune", "data.txt", long, decode.FormatCSV},
		{"protobuf by content", "capture", pb, decode.FormatProto},
		{"protobuf starting with tracks", "capture", tracksFirst, decode.FormatProto},
		{"invalid UTF-8", "x", []byte("time_s\xff,"), decode.FormatProto},
		{"DEL byte", "x", []byte("time_s\x7f"), decode.FormatProto},
	}
	for _, tc := range cases {
		if got := decode.Detect(tc.file, tc.b); got != tc.want {
			t.Errorf("%s: Detect = %v, want %v", tc.name, got, tc.want)
		}
	}
	for f, s := range map[decode.Format]string{decode.FormatCSV: "csv", decode.FormatJSON: "json", decode.FormatProto: "protobuf", decode.FormatUnknown: "unknown"} {
		if f.String() != s {
			t.Errorf("%d.String() = %q", f, f.String())
		}
	}
}

func TestFileLimitsAndEmpty(t *testing.T) {
	_, _, err := decode.File("a.csv", nil, validate.Limits{})
	if validate.ReasonOf(err) != validate.ReasonEmpty {
		t.Errorf("empty file: %v", err)
	}
	_, _, err = decode.File("a.csv", make([]byte, 11), validate.Limits{MaxBytes: 10})
	if validate.ReasonOf(err) != validate.ReasonTooLarge {
		t.Errorf("large file: %v", err)
	}
	_, err = decode.JSON(make([]byte, validate.DefaultMaxBytes+1))
	if validate.ReasonOf(err) != validate.ReasonTooLarge {
		t.Errorf("large JSON: %v", err)
	}
	_, err = decode.JSONRequest([]byte("{"))
	if validate.ReasonOf(err) != validate.ReasonMalformed {
		t.Errorf("bad request: %v", err)
	}
	_, _, err = decode.File("a.csv", []byte("time_s,segment,qx\n"), validate.Limits{})
	var e *validate.Error
	if !errors.As(err, &e) || e.Field != "qw" {
		t.Errorf("csv error through File: %v", err)
	}
}

// TestFileFormatsAgree decodes one capture written in each format.
func TestFileFormatsAgree(t *testing.T) {
	c := spinCapture(2, 100, 0.2)
	h := 10.0
	c.TargetHeadingDeg = &h
	c.Tracks[1].Mounting = &kinchainv1.Quaternion{W: math.Sqrt(0.5), Z: math.Sqrt(0.5)}
	pb, _ := proto.Marshal(c)
	for _, name := range []string{"c.pb", "c"} {
		got, loc, err := decode.File(name, pb, validate.Limits{})
		if err != nil || loc != nil || !proto.Equal(got, c) {
			t.Errorf("%s: %v %v", name, err, loc)
		}
	}
}
