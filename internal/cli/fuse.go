package cli

import (
	"bufio"
	"bytes"
	"context"
	"flag"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"strings"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/capture"
	"github.com/kinchain/kinchain/internal/decode"
	"github.com/kinchain/kinchain/internal/fusion"
	"github.com/kinchain/kinchain/internal/validate"
)

const fuseUsage = `Usage: kinchain fuse [flags] FILE|-

Estimates each track's orientation from its raw IMU columns with VQF and
prints a capture CSV (time_s,segment,qw,qx,qy,qz, metadata kept) that
'kinchain analyze' reads.

Input: a capture file (CSV, protojson or protobuf; - for standard input).
CSV columns: time_s (s), gx gy gz (rad/s), ax ay az (m/s²), optional
mx my mz (any unit), optional segment. Without a segment column the file is
one track: name it with --segment NAME or a '# segment: NAME' line. Without
a time_s column give --rate HZ: sample k of each segment is then at k/HZ s.
Tracks with quaternions only are copied unchanged; tracks with both are
fused from their raw columns.

Frames: quaternions rotate sensor → world, world z up. With a magnetometer
world x is magnetic east and y magnetic north; with --no-mag (or without
mx my mz) the heading is free and drifts slowly.

Readings at or past the sensor's range (--gyro-range-dps, --accel-range-g)
or flat at their extreme are reported on standard error.

Flags:
`

// RunFuse implements `kinchain fuse`: read raw IMU tracks, estimate their
// orientations (package fusion) and write a capture CSV of quaternions.
// Findings (saturation, clipping) go to stderr as warnings.
func RunFuse(ctx context.Context, args []string, stdin io.Reader, stdout, stderr io.Writer) error {
	fs := flag.NewFlagSet("fuse", flag.ContinueOnError)
	fs.SetOutput(stderr)
	fs.Usage = func() {
		fmt.Fprint(stderr, fuseUsage)
		fs.PrintDefaults()
	}
	noMag := fs.Bool("no-mag", false, "ignore magnetometer columns (6D: heading drifts freely)")
	rate := fs.Float64("rate", 0, "sample rate in Hz of a CSV without a time_s column")
	segFlag := fs.String("segment", "", "segment of a one-track CSV without a segment column (pelvis, thorax, head, lead_upper_arm, lead_forearm, lead_hand, trail_upper_arm, trail_forearm, trail_hand, club)")
	gyroRange := fs.Float64("gyro-range-dps", 2000, "gyroscope full-scale range in deg/s, for saturation findings")
	accelRange := fs.Float64("accel-range-g", 16, "accelerometer full-scale range in g, for clipping findings")
	pos, err := parseArgs(fs, args)
	if err != nil {
		return err
	}
	switch {
	case len(pos) == 0:
		return usagef("no input given: name a file, or - for standard input")
	case len(pos) > 1:
		return usagef("one input file at a time (got %d)", len(pos))
	case math.IsNaN(*rate) || math.IsInf(*rate, 0) || *rate < 0:
		return usagef("--rate: %v is not a positive rate in Hz", *rate)
	case !(*gyroRange > 0) || math.IsInf(*gyroRange, 0):
		return usagef("--gyro-range-dps: %v is not a positive range", *gyroRange)
	case !(*accelRange > 0) || math.IsInf(*accelRange, 0):
		return usagef("--accel-range-g: %v is not a positive range", *accelRange)
	}
	if *segFlag != "" {
		if _, ok := fuseSegment(*segFlag); !ok {
			return usagef("--segment: %q is not one of %s", *segFlag, strings.Join(fuseSegmentNames(), ", "))
		}
	}

	lim := validate.DefaultLimits()
	name := pos[0]
	var data []byte
	if name == "-" {
		data, err = io.ReadAll(io.LimitReader(stdin, int64(lim.MaxBytes)+1))
		name = "stdin"
	} else {
		data, err = os.ReadFile(name)
	}
	if err != nil {
		return err
	}
	if len(data) > lim.MaxBytes {
		return fmt.Errorf("%s: larger than the %d-byte limit", name, lim.MaxBytes)
	}
	format := decode.Detect(filepath.Base(name), data)
	if format == decode.FormatCSV {
		if data, err = fuseCompleteCSV(data, *rate, *segFlag); err != nil {
			return err
		}
	} else if *rate > 0 || *segFlag != "" {
		return usagef("--rate and --segment apply to CSV input only (%s is %v)", name, format)
	}
	pc, loc, err := decode.File(filepath.Base(name), data, lim)
	if err != nil {
		return fmt.Errorf("%s: %w", name, err)
	}
	c, err := validate.Capture(pc, lim, loc)
	if err != nil {
		return fmt.Errorf("%s: %w", name, err)
	}

	opt := fusion.Options{
		IgnoreMag:  *noMag,
		GyroRange:  *gyroRange * math.Pi / 180,
		AccelRange: *accelRange * 9.80665,
	}
	modes := make([]string, 0, len(c.Tracks))
	for i := range c.Tracks {
		if err := ctx.Err(); err != nil {
			return err
		}
		t := &c.Tracks[i]
		seg := fuseSegName(t.Segment)
		if t.Gyro == nil || t.Accel == nil {
			fmt.Fprintf(stderr, "kinchain fuse: %s: no gyroscope and accelerometer columns; quaternions copied unchanged\n", seg)
			continue
		}
		rep, err := fusion.Track(t, opt)
		if err != nil {
			return err
		}
		mode := "6D"
		if rep.Mag {
			mode = "9D"
		}
		modes = append(modes, seg+" "+mode)
		for _, w := range rep.Warnings(t.Segment) {
			fmt.Fprintf(stderr, "kinchain fuse: warning: %s: %s\n", seg, w.GetMessage())
		}
	}
	bw := bufio.NewWriterSize(stdout, 64<<10)
	fuseWriteCSV(bw, pc, c, modes)
	return bw.Flush()
}

// fuseSegment maps a lower-case segment name to the enum.
func fuseSegment(s string) (kinchainv1.Segment, bool) {
	v, ok := kinchainv1.Segment_value["SEGMENT_"+strings.ToUpper(s)]
	if !ok || v == 0 || s != strings.ToLower(s) {
		return 0, false
	}
	return kinchainv1.Segment(v), true
}

// fuseSegmentNames returns the lower-case segment names in enum order.
func fuseSegmentNames() []string {
	var out []string
	for n := int32(1); ; n++ {
		_, ok := kinchainv1.Segment_name[n]
		if !ok {
			return out
		}
		out = append(out, fuseSegName(kinchainv1.Segment(n)))
	}
}

// fuseSegName returns the lower-case name of s ("lead_hand").
func fuseSegName(s kinchainv1.Segment) string {
	return strings.ToLower(strings.TrimPrefix(s.String(), "SEGMENT_"))
}

// fuseCompleteCSV adds what the flags supply to a CSV capture, keeping every
// line where it was (so decode's line numbers stay right): with rate > 0 a
// leading time_s column, k/rate for the k-th row of each segment; with seg
// a trailing segment column. It checks that the file lacks those columns,
// and that a file without time_s gets --rate.
func fuseCompleteCSV(data []byte, rate float64, seg string) ([]byte, error) {
	data = bytes.TrimPrefix(data, []byte("\xef\xbb\xbf"))
	lines := bytes.SplitAfter(data, []byte("\n"))
	hdr := -1
	segLine := 0
	for i, l := range lines {
		s := strings.TrimSpace(string(l))
		if s == "" {
			continue
		}
		if strings.HasPrefix(s, "#") {
			if k, _, ok := strings.Cut(strings.TrimSpace(s[1:]), ":"); ok && strings.TrimSpace(k) == "segment" {
				segLine = i + 1
			}
			continue
		}
		hdr = i
		break
	}
	if hdr < 0 {
		return data, nil // decode reports the missing header
	}
	cols := strings.Split(string(bytes.TrimRight(lines[hdr], "\r\n")), ",")
	timeCol, segCol := -1, -1
	for j, c := range cols {
		switch strings.TrimSpace(c) {
		case "time_s":
			timeCol = j
		case "segment":
			segCol = j
		}
	}
	switch {
	case rate > 0 && timeCol >= 0:
		return nil, usagef("--rate: the file has a time_s column (line %d); --rate is for files without one", hdr+1)
	case rate == 0 && timeCol < 0:
		return nil, usagef("line %d: no time_s column; give the sample rate with --rate HZ", hdr+1)
	case seg != "" && segCol >= 0:
		return nil, usagef("--segment: the file has a segment column (line %d); --segment is for one-track files without one", hdr+1)
	case seg != "" && segLine > 0:
		return nil, usagef("--segment: the file names its segment on line %d already", segLine)
	}
	if rate == 0 && seg == "" {
		return data, nil
	}
	var out bytes.Buffer
	out.Grow(len(data) + len(lines)*24)
	count := map[string]int{}
	var num []byte
	for i, l := range lines {
		body := bytes.TrimRight(l, "\r\n")
		end := l[len(body):]
		s := bytes.TrimSpace(body)
		if i < hdr || len(s) == 0 || s[0] == '#' {
			out.Write(l)
			continue
		}
		if rate > 0 {
			if i == hdr {
				out.WriteString("time_s,")
			} else {
				key := ""
				if segCol >= 0 {
					if f := bytes.Split(body, []byte(",")); segCol < len(f) {
						key = string(bytes.TrimSpace(f[segCol]))
					}
				}
				num = strconv.AppendFloat(num[:0], float64(count[key])/rate, 'g', -1, 64)
				count[key]++
				out.Write(num)
				out.WriteByte(',')
			}
		}
		out.Write(body)
		if seg != "" {
			if i == hdr {
				out.WriteString(",segment")
			} else {
				out.WriteByte(',')
				out.WriteString(seg)
			}
		}
		out.Write(end)
	}
	return out.Bytes(), nil
}

// fuseWriteCSV writes the capture in the CSV format decode.CSV reads:
// the capture's metadata as "# key: value" lines (plus "fusion", the mode
// per fused track), then time_s,segment,qw,qx,qy,qz rows, track by track.
// Times keep their exact values; quaternion components get 10 significant
// digits.
func fuseWriteCSV(w *bufio.Writer, pc *kinchainv1.Capture, c *capture.Capture, modes []string) {
	meta := func(k, v string) { fmt.Fprintf(w, "# %s: %s\n", k, v) }
	if pc.GetCaptureId() != "" {
		meta("capture_id", pc.GetCaptureId())
	}
	switch pc.GetHandedness() {
	case kinchainv1.Handedness_HANDEDNESS_RIGHT:
		meta("handedness", "right")
	case kinchainv1.Handedness_HANDEDNESS_LEFT:
		meta("handedness", "left")
	}
	if pc.GetClub() != "" {
		meta("club", pc.GetClub())
	}
	if pc.TargetHeadingDeg != nil {
		meta("target_heading_deg", strconv.FormatFloat(pc.GetTargetHeadingDeg(), 'g', -1, 64))
	}
	if n := pc.GetNeutral(); n != nil {
		meta("neutral", strconv.FormatFloat(n.GetStartS(), 'g', -1, 64)+":"+strconv.FormatFloat(n.GetEndS(), 'g', -1, 64))
	}
	for _, t := range c.Tracks {
		if m := t.Mounting; m != nil {
			meta("mounting."+fuseSegName(t.Segment), fmt.Sprintf("%.10g %.10g %.10g %.10g", m.Real, m.Imag, m.Jmag, m.Kmag))
		}
	}
	md := pc.GetMetadata()
	keys := make([]string, 0, len(md))
	for k := range md {
		if k != "fusion" || len(modes) == 0 {
			keys = append(keys, k)
		}
	}
	slices.Sort(keys)
	for _, k := range keys {
		meta(k, md[k])
	}
	if len(modes) > 0 {
		meta("fusion", "VQF "+strings.Join(modes, ", "))
	}
	w.WriteString("time_s,segment,qw,qx,qy,qz\n")
	var b []byte
	for _, t := range c.Tracks {
		name := fuseSegName(t.Segment)
		for i, tt := range t.Time {
			q := t.Q[i]
			b = strconv.AppendFloat(b[:0], tt, 'g', -1, 64)
			b = append(b, ',')
			b = append(b, name...)
			for _, v := range [4]float64{q.Real, q.Imag, q.Jmag, q.Kmag} {
				b = append(b, ',')
				b = strconv.AppendFloat(b, v, 'g', 10, 64)
			}
			b = append(b, '\n')
			w.Write(b)
		}
	}
}
