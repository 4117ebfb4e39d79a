package cli

import (
	"bytes"
	"context"
	"flag"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"google.golang.org/protobuf/encoding/protojson"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/synth"
)

// TestAnalyzeJSONMatchesSynthTruth is the foundation's acceptance check:
// `kinchain synth` writes the model golfer at 1000 Hz, `kinchain analyze
// --format json --cutoff-hz 0` reads it back, and every peak speed is within
// 0.5 % of the model's analytic truth (computed from its closed-form angular
// velocity, not from the samples).
func TestAnalyzeJSONMatchesSynthTruth(t *testing.T) {
	dir := t.TempDir()
	file := filepath.Join(dir, "golfer.csv")
	var out, errb bytes.Buffer
	if err := RunSynth(context.Background(), []string{"--rate", "1000", "--out", file}, &out, &errb); err != nil {
		t.Fatalf("synth: %v (%s)", err, errb.String())
	}
	_, truth, err := synth.Generate(synth.Config{Rate: 1000})
	if err != nil {
		t.Fatal(err)
	}
	out.Reset()
	if err := RunAnalyze(context.Background(), []string{"--format", "json", "--cutoff-hz", "0", file}, nil, &out, &errb); err != nil {
		t.Fatalf("analyze: %v (%s)", err, errb.String())
	}
	var resp kinchainv1.AnalyzeCaptureResponse
	if err := protojson.Unmarshal(out.Bytes(), &resp); err != nil {
		t.Fatalf("output is not the protojson of AnalyzeCaptureResponse: %v", err)
	}
	if !strings.Contains(out.String(), `"peak_speed_deg_per_s"`) {
		t.Errorf("json output does not use the proto field names")
	}
	if len(resp.GetSwings()) != 1 || len(truth.Swings) != 1 {
		t.Fatalf("%d swings found, truth has %d", len(resp.GetSwings()), len(truth.Swings))
	}
	want := truth.Swings[0].Peaks
	rows := resp.GetSwings()[0].GetSequence()
	if len(rows) != len(want) {
		t.Fatalf("%d sequence rows, truth has %d segments", len(rows), len(want))
	}
	for _, r := range rows {
		w := want[r.GetSegment()].SpeedDegPerS
		if d := math.Abs(r.GetPeakSpeedDegPerS()-w) / w; d > 0.005 {
			t.Errorf("%v: peak %.2f deg/s, truth %.2f (%.3f %%)", r.GetSegment(), r.GetPeakSpeedDegPerS(), w, d*100)
		}
	}
	// The whole-capture peak of the kinematic chain's segments is the
	// downswing peak in this model.
	for _, s := range resp.GetSegments() {
		switch s.GetSegment() {
		case kinchainv1.Segment_SEGMENT_PELVIS, kinchainv1.Segment_SEGMENT_THORAX, kinchainv1.Segment_SEGMENT_LEAD_UPPER_ARM,
			kinchainv1.Segment_SEGMENT_LEAD_HAND, kinchainv1.Segment_SEGMENT_CLUB:
			w := want[s.GetSegment()].SpeedDegPerS
			if d := math.Abs(s.GetPeakSpeedDegPerS()-w) / w; d > 0.005 {
				t.Errorf("segments[%v]: peak %.2f deg/s, truth %.2f", s.GetSegment(), s.GetPeakSpeedDegPerS(), w)
			}
			if s.GetCutoffHz() != 0 {
				t.Errorf("segments[%v]: cutoff %g Hz with --cutoff-hz 0", s.GetSegment(), s.GetCutoffHz())
			}
		}
	}
}

// TestAnalyzeTextDemo: the README's first command prints the report.
func TestAnalyzeTextDemo(t *testing.T) {
	var out, errb bytes.Buffer
	if code := Main([]string{"analyze", "--demo"}, nil, &out, &errb); code != 0 {
		t.Fatalf("exit %d: %s", code, errb.String())
	}
	for _, want := range []string{"Swing 1 of 1", "Kinematic sequence", "pelvis → thorax", "Posture (deg)", "Data quality", "address", "impact"} {
		if !strings.Contains(out.String(), want) {
			t.Errorf("report lacks %q", want)
		}
	}
}

// TestAnalyzeErrors: bad input names the file, the field and the line;
// usage mistakes exit 2.
func TestAnalyzeErrors(t *testing.T) {
	bad := filepath.Join("..", "..", "testdata", "bad", "csv_nan.csv")
	if _, err := os.Stat(bad); err != nil {
		t.Fatal(err)
	}
	var out, errb bytes.Buffer
	if code := Main([]string{"analyze", bad}, nil, &out, &errb); code != 1 {
		t.Fatalf("exit %d for a bad file, want 1", code)
	}
	if msg := errb.String(); !strings.Contains(msg, "csv_nan.csv") || !strings.Contains(msg, "(line ") || !strings.Contains(msg, "tracks[0]") {
		t.Errorf("error %q does not name the file, field and line", msg)
	}
	for _, args := range [][]string{
		{"analyze"},
		{"analyze", "--speed", "sideways", "--demo"},
		{"analyze", "--format", "xml", "--demo"},
		{"analyze", "--cutoff-hz", "abc", "--demo"},
		{"analyze", "--neutral", "2:1", "--demo"},
		{"analyze", "--gyro-range-dps", "-2000", "--demo"},
		{"analyze", "--accel-range-g", "NaN", "--demo"},
		{"nonsense"},
	} {
		errb.Reset()
		if code := Main(args, nil, &out, &errb); code != 2 {
			t.Errorf("%v: exit %d, want 2 (%s)", args, code, errb.String())
		}
	}
}

// The sensor-range flags reach the options (their effect on fused tracks
// is checked in internal/engine, TestSensorRanges).
func TestSensorRangeFlags(t *testing.T) {
	var f analysisFlags
	fs := flag.NewFlagSet("analyze", flag.ContinueOnError)
	f.register(fs)
	if err := fs.Parse([]string{"--gyro-range-dps", "4000", "--accel-range-g", "200"}); err != nil {
		t.Fatal(err)
	}
	o, err := f.options()
	if err != nil {
		t.Fatal(err)
	}
	if o.GetGyroRangeDps() != 4000 || o.GetAccelRangeG() != 200 {
		t.Errorf("options %v", o)
	}
}
