package cli

import (
	"bytes"
	"context"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"gonum.org/v1/gonum/num/quat"
	"gonum.org/v1/gonum/spatial/r3"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/capture"
	"github.com/kinchain/kinchain/internal/decode"
	"github.com/kinchain/kinchain/internal/rot"
	"github.com/kinchain/kinchain/internal/validate"
)

// fuseTruth is a closed-form motion: 2 s still, then turning about world z
// at 90 °/s, the sensor tilted 0.3 rad about its y axis and headed 0.5 rad.
func fuseTruth(t float64) (q quat.Number, bodyRate r3.Vec) {
	const w = 90 * math.Pi / 180
	turn := 0.0
	rate := 0.0
	if t > 2 {
		turn, rate = w*(t-2), w
	}
	tilt := rot.FromAxisAngle(r3.Vec{Y: 1}, 0.3)
	q = rot.Mul(rot.YawRotation(0.5+turn), tilt)
	return q, rot.InvRotate(tilt, r3.Vec{Z: rate})
}

// fuseField is the Earth's field in the world frame (ENU), µT (a
// mid-latitude field; from memory).
var fuseField = r3.Vec{Y: 20, Z: -44}

// fuseRawCSV writes n samples at rate Hz of fuseTruth as raw columns. cols
// chooses the layout: "time" adds time_s, "seg" a segment column with the
// given name, "mag" the magnetometer.
func fuseRawCSV(n int, rate float64, seg string, withTime, withMag bool, meta string) string {
	var b strings.Builder
	b.WriteString(meta)
	var hdr []string
	if withTime {
		hdr = append(hdr, "time_s")
	}
	hdr = append(hdr, "gx", "gy", "gz", "ax", "ay", "az")
	if withMag {
		hdr = append(hdr, "mx", "my", "mz")
	}
	if seg != "" {
		hdr = append(hdr, "segment")
	}
	b.WriteString(strings.Join(hdr, ",") + "\n")
	for i := 0; i < n; i++ {
		t := float64(i) / rate
		q, w := fuseTruth(t)
		a := rot.InvRotate(q, r3.Vec{Z: 9.81})
		var f []string
		if withTime {
			f = append(f, fmt.Sprint(t))
		}
		for _, v := range []float64{w.X, w.Y, w.Z, a.X, a.Y, a.Z} {
			f = append(f, fmt.Sprintf("%.9g", v))
		}
		if withMag {
			m := rot.InvRotate(q, fuseField)
			for _, v := range []float64{m.X, m.Y, m.Z} {
				f = append(f, fmt.Sprintf("%.9g", v))
			}
		}
		if seg != "" {
			f = append(f, seg)
		}
		b.WriteString(strings.Join(f, ",") + "\n")
	}
	return b.String()
}

// fuseReadBack decodes and validates fuse's output the way analyze reads a
// capture (decode.CSV, validate.Capture).
func fuseReadBack(t *testing.T, out string) (*kinchainv1.Capture, *capture.Capture) {
	t.Helper()
	pc, loc, err := decode.CSV(strings.NewReader(out), validate.Limits{})
	if err != nil {
		t.Fatalf("output does not decode: %v\n%.400s", err, out)
	}
	c, err := validate.Capture(pc, validate.Limits{}, loc)
	if err != nil {
		t.Fatalf("output does not validate: %v", err)
	}
	return pc, c
}

func fuseRun(args []string, stdin string) (string, string, error) {
	var out, errb bytes.Buffer
	err := RunFuse(context.Background(), args, strings.NewReader(stdin), &out, &errb)
	return out.String(), errb.String(), err
}

// The fused output reads back as a capture whose orientations match the
// closed-form truth: world z up and, with the magnetometer, world y toward
// magnetic north (VQF's frame). Bound: 1° after the first second (the
// fusion package's synthetic tests bound the filter itself more tightly).
func TestFuseRoundTrip(t *testing.T) {
	in := fuseRawCSV(1000, 100, "", true, true, "# segment: lead_hand\n# handedness: left\n# club: 7-iron\n# venue: range 3\n")
	out, stderr, err := fuseRun([]string{"-"}, in)
	if err != nil {
		t.Fatalf("fuse: %v (stderr %q)", err, stderr)
	}
	if !strings.Contains(out, "time_s,segment,qw,qx,qy,qz\n") {
		t.Fatalf("header missing:\n%.300s", out)
	}
	pc, c := fuseReadBack(t, out)
	if pc.GetHandedness() != kinchainv1.Handedness_HANDEDNESS_LEFT || pc.GetClub() != "7-iron" || pc.GetMetadata()["venue"] != "range 3" {
		t.Errorf("metadata not carried: %v %q %v", pc.GetHandedness(), pc.GetClub(), pc.GetMetadata())
	}
	if got := pc.GetMetadata()["fusion"]; got != "VQF lead_hand 9D" {
		t.Errorf("fusion metadata %q", got)
	}
	if len(c.Tracks) != 1 || c.Tracks[0].Segment != kinchainv1.Segment_SEGMENT_LEAD_HAND {
		t.Fatalf("tracks %+v", c.Tracks)
	}
	tr := c.Tracks[0]
	if len(tr.Time) != 1000 || tr.Time[999] != 9.99 {
		t.Fatalf("times not carried: %d samples, last %v", len(tr.Time), tr.Time[len(tr.Time)-1])
	}
	worst := 0.0
	for i, tt := range tr.Time {
		if tt < 1 {
			continue
		}
		q, _ := fuseTruth(tt)
		worst = math.Max(worst, rot.Angle(tr.Q[i], q))
	}
	if worst > 1*math.Pi/180 {
		t.Fatalf("fused orientation off the truth by up to %.2f°", worst*180/math.Pi)
	}
}

// --rate gives the times of a file without time_s; --segment names the
// track of a file without a segment column; --no-mag fuses 6D (inclination
// still right, heading free).
func TestFuseRateSegmentNoMag(t *testing.T) {
	in := fuseRawCSV(500, 200, "", false, true, "")
	out, stderr, err := fuseRun([]string{"--rate", "200", "--segment", "club", "--no-mag", "-"}, in)
	if err != nil {
		t.Fatalf("fuse: %v (%s)", err, stderr)
	}
	pc, c := fuseReadBack(t, out)
	tr := c.Tracks[0]
	if tr.Segment != kinchainv1.Segment_SEGMENT_CLUB || len(tr.Time) != 500 {
		t.Fatalf("track %v with %d samples", tr.Segment, len(tr.Time))
	}
	if tr.Time[0] != 0 || math.Abs(tr.Time[499]-499.0/200) > 1e-15 {
		t.Fatalf("times %v … %v, want 0 … 2.495", tr.Time[0], tr.Time[499])
	}
	if got := pc.GetMetadata()["fusion"]; got != "VQF club 6D" {
		t.Errorf("fusion metadata %q", got)
	}
	for i, tt := range tr.Time {
		q, _ := fuseTruth(tt)
		up, want := rot.InvRotate(tr.Q[i], r3.Vec{Z: 1}), rot.InvRotate(q, r3.Vec{Z: 1})
		if a := math.Acos(math.Min(1, r3.Dot(up, want))); a > 0.5*math.Pi/180 {
			t.Fatalf("t=%g: inclination off by %.2f°", tt, a*180/math.Pi)
		}
	}
}

// A file with a segment column may hold several tracks, with or without
// magnetometer, and tracks with quaternions only are copied.
func TestFuseSeveralTracks(t *testing.T) {
	a := fuseRawCSV(300, 100, "pelvis", true, false, "")
	b := fuseRawCSV(300, 100, "thorax", true, false, "")
	// Interleave the rows of the two tracks under one header.
	al := strings.Split(strings.TrimSpace(a), "\n")
	bl := strings.Split(strings.TrimSpace(b), "\n")
	var in strings.Builder
	in.WriteString(al[0] + "\n")
	for i := 1; i < len(al); i++ {
		in.WriteString(al[i] + "\n" + bl[i] + "\n")
	}
	out, stderr, err := fuseRun([]string{"-"}, in.String())
	if err != nil {
		t.Fatalf("fuse: %v (%s)", err, stderr)
	}
	_, c := fuseReadBack(t, out)
	if len(c.Tracks) != 2 || c.Tracks[0].Segment != kinchainv1.Segment_SEGMENT_PELVIS || c.Tracks[1].Segment != kinchainv1.Segment_SEGMENT_THORAX {
		t.Fatalf("tracks %v", c.Tracks)
	}
	// Quaternion-only input passes through unchanged.
	q := "# segment: head\ntime_s,qw,qx,qy,qz\n"
	for i := 0; i < 50; i++ {
		q += fmt.Sprintf("%g,0.5,0.5,0.5,0.5\n", float64(i)/50)
	}
	out, stderr, err = fuseRun([]string{"-"}, q)
	if err != nil {
		t.Fatalf("fuse: %v", err)
	}
	if !strings.Contains(stderr, "head: no gyroscope and accelerometer columns") {
		t.Errorf("no note about the copied track: %q", stderr)
	}
	_, c = fuseReadBack(t, out)
	if got := c.Tracks[0].Q[10]; got != (quat.Number{Real: 0.5, Imag: 0.5, Jmag: 0.5, Kmag: 0.5}) {
		t.Errorf("copied quaternion changed: %v", got)
	}
}

// Clipped readings are reported on stderr as warnings.
func TestFuseReportsSaturation(t *testing.T) {
	in := fuseRawCSV(400, 100, "", true, false, "# segment: club\n")
	lines := strings.Split(in, "\n")
	// Rows 300–305 (lines 302–307): gz flat at 2000 °/s.
	for i := 302; i < 308; i++ {
		f := strings.Split(lines[i], ",")
		f[3] = fmt.Sprint(2000 * math.Pi / 180)
		lines[i] = strings.Join(f, ",")
	}
	_, stderr, err := fuseRun([]string{"-"}, strings.Join(lines, "\n"))
	if err != nil {
		t.Fatalf("fuse: %v", err)
	}
	if !strings.Contains(stderr, "warning: club: gyroscope z axis") || !strings.Contains(stderr, "6 samples, 3.000–3.050 s") {
		t.Fatalf("saturation not reported: %q", stderr)
	}
	// A wider configured range and plateau threshold: only the flat top is
	// left, and it is 2000/4000 = 50 % ≥ 25 % of the range: still found.
	_, stderr, err = fuseRun([]string{"--gyro-range-dps", "4000", "-"}, strings.Join(lines, "\n"))
	if err != nil || !strings.Contains(stderr, "flat at its extreme") || strings.Contains(stderr, "configured range") {
		t.Fatalf("plateau with a wide range: %v %q", err, stderr)
	}
}

// Files on disk work like standard input.
func TestFuseFile(t *testing.T) {
	p := filepath.Join(t.TempDir(), "raw.csv")
	if err := os.WriteFile(p, []byte(fuseRawCSV(100, 100, "", true, true, "# segment: head\n")), 0o600); err != nil {
		t.Fatal(err)
	}
	out, _, err := fuseRun([]string{p}, "")
	if err != nil {
		t.Fatal(err)
	}
	fuseReadBack(t, out)
}

// Bad input and flags give clear errors; usage mistakes are usage errors.
func TestFuseErrors(t *testing.T) {
	withTime := fuseRawCSV(100, 100, "", true, false, "")
	noTime := fuseRawCSV(100, 100, "", false, false, "")
	named := fuseRawCSV(100, 100, "", true, false, "# segment: head\n")
	segCol := fuseRawCSV(100, 100, "head", true, false, "")
	cases := []struct {
		name  string
		args  []string
		in    string
		want  string
		usage bool
	}{
		{"no input", nil, "", "no input given", true},
		{"two inputs", []string{"a", "b"}, "", "one input file", true},
		{"bad rate", []string{"--rate", "-3", "-"}, noTime, "--rate", true},
		{"bad range", []string{"--gyro-range-dps", "0", "-"}, withTime, "--gyro-range-dps", true},
		{"unknown segment", []string{"--segment", "elbow", "-"}, withTime, `"elbow" is not one of pelvis`, true},
		{"upper-case segment", []string{"--segment", "CLUB", "-"}, withTime, "is not one of", true},
		{"no time no rate", []string{"--segment", "club", "-"}, noTime, "no time_s column; give the sample rate with --rate", true},
		{"time and rate", []string{"--rate", "100", "--segment", "club", "-"}, withTime, "the file has a time_s column", true},
		{"segment twice", []string{"--segment", "club", "-"}, segCol, "has a segment column", true},
		{"segment line", []string{"--segment", "club", "-"}, named, "names its segment on line 1", true},
		{"no segment", []string{"-"}, withTime, "segment", false},
		{"missing file", []string{filepath.Join(t.TempDir(), "nope.csv")}, "", "no such file", false},
		{"bad number", []string{"-"}, strings.Replace(named, "\n0.5,", "\n0.5x,", 1), "line", false},
		{"flag on JSON", []string{"--rate", "100", "-"}, `{"tracks": []}`, "CSV input only", true},
	}
	for _, c := range cases {
		_, _, err := fuseRun(c.args, c.in)
		if err == nil {
			t.Errorf("%s: no error", c.name)
			continue
		}
		if !strings.Contains(err.Error(), c.want) {
			t.Errorf("%s: error %q, want it to contain %q", c.name, err, c.want)
		}
		if isUsage(err) != c.usage {
			t.Errorf("%s: usage error %v, want %v (%v)", c.name, isUsage(err), c.usage, err)
		}
	}
}

// Help prints the usage and succeeds the way the dispatcher expects.
func TestFuseHelp(t *testing.T) {
	_, stderr, err := fuseRun([]string{"-h"}, "")
	if err == nil || !strings.Contains(stderr, "Usage: kinchain fuse") || !strings.Contains(stderr, "--no-mag") {
		t.Fatalf("help: %v %q", err, stderr)
	}
}
