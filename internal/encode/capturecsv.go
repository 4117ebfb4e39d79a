package encode

import (
	"bufio"
	"errors"
	"fmt"
	"io"
	"maps"
	"slices"
	"strconv"
	"strings"
	"unicode/utf8"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
)

// captureColumns are the CSV sample columns after time_s and segment, in
// Track field order; the index is that of trackColumns' result.
var captureColumns = [...]string{
	"time_s", "qw", "qx", "qy", "qz", "gx", "gy", "gz", "ax", "ay", "az",
	"mx", "my", "mz", "px", "py", "pz",
}

// captureGroups are the columns that come together (indices as above).
var captureGroups = [...][]int{{1, 2, 3, 4}, {5, 6, 7}, {8, 9, 10}, {11, 12, 13}, {14, 15, 16}}

// reservedMetadata are the "# key:" names the CSV reader interprets itself
// (kept in step with package decode); "mounting." keys are a family.
var reservedMetadata = []string{"capture_id", "handedness", "club", "target_heading_deg", "neutral", "segment", "mounting"}

func trackColumns(t *kinchainv1.Track) [len(captureColumns)][]float64 {
	return [...][]float64{
		t.GetTimeS(), t.GetQw(), t.GetQx(), t.GetQy(), t.GetQz(),
		t.GetGx(), t.GetGy(), t.GetGz(), t.GetAx(), t.GetAy(), t.GetAz(),
		t.GetMx(), t.GetMy(), t.GetMz(), t.GetPx(), t.GetPy(), t.GetPz(),
	}
}

// WriteCaptureCSV writes c in kinchain's CSV capture format, the one
// decode.CSV reads: "# key: value" metadata lines (capture_id, handedness,
// club, target_heading_deg, neutral, mounting.<segment>, then the metadata
// map in key order), a header row with time_s, segment and the sample
// columns some track has (qw qx qy qz also when no track has orientation
// columns, as the reader needs them), then one row per sample, the tracks interleaved
// by time (ties in track order). Cells of columns a track lacks are empty.
// Numbers are written in the shortest form that reads back to the same
// float64.
//
// Decoding the output gives c back (proto.Equal) when c's tracks are in
// segment order, as the reader returns them. WriteCaptureCSV fails, writing
// nothing, for what the format cannot hold: tracks without samples, with an
// unknown or repeated segment, with arrays of other lengths than time_s or
// part of a group (qw qx qy qz, gx gy gz, ...); an unknown handedness;
// strings with line breaks, invalid UTF-8 or surrounding blanks; metadata
// keys other than letters, digits and _ . - or that the reader interprets.
func WriteCaptureCSV(w io.Writer, c *kinchainv1.Capture) error {
	if c == nil {
		return errors.New("capture csv: no capture")
	}
	cols, err := checkCSV(c)
	if err != nil {
		return fmt.Errorf("capture csv: %w", err)
	}
	bw := bufio.NewWriterSize(w, 64<<10)
	meta := func(key, value string) {
		bw.WriteString("# ")
		bw.WriteString(key)
		bw.WriteByte(':')
		if value != "" {
			bw.WriteByte(' ')
			bw.WriteString(value)
		}
		bw.WriteByte('\n')
	}
	f := func(v float64) string { return strconv.FormatFloat(v, 'g', -1, 64) }
	if c.GetCaptureId() != "" {
		meta("capture_id", c.GetCaptureId())
	}
	switch c.GetHandedness() {
	case kinchainv1.Handedness_HANDEDNESS_RIGHT:
		meta("handedness", "right")
	case kinchainv1.Handedness_HANDEDNESS_LEFT:
		meta("handedness", "left")
	}
	if c.GetClub() != "" {
		meta("club", c.GetClub())
	}
	if c.TargetHeadingDeg != nil {
		meta("target_heading_deg", f(c.GetTargetHeadingDeg()))
	}
	if n := c.GetNeutral(); n != nil {
		meta("neutral", f(n.GetStartS())+":"+f(n.GetEndS()))
	}
	for _, t := range c.GetTracks() {
		if m := t.GetMounting(); m != nil {
			meta("mounting."+SegmentName(t.GetSegment()), f(m.GetW())+" "+f(m.GetX())+" "+f(m.GetY())+" "+f(m.GetZ()))
		}
	}
	for _, k := range slices.Sorted(maps.Keys(c.GetMetadata())) {
		meta(k, c.GetMetadata()[k])
	}

	bw.WriteString("time_s,segment")
	for _, k := range cols {
		bw.WriteByte(',')
		bw.WriteString(captureColumns[k])
	}
	bw.WriteByte('\n')

	tracks := c.GetTracks()
	arrays := make([][len(captureColumns)][]float64, len(tracks))
	names := make([]string, len(tracks))
	for i, t := range tracks {
		arrays[i] = trackColumns(t)
		names[i] = SegmentName(t.GetSegment())
	}
	next := make([]int, len(tracks))
	buf := make([]byte, 0, 512)
	for {
		best := -1
		for i := range tracks {
			if next[i] < len(arrays[i][0]) && (best < 0 || arrays[i][0][next[i]] < arrays[best][0][next[best]]) {
				best = i
			}
		}
		if best < 0 {
			break
		}
		k := next[best]
		next[best]++
		a := &arrays[best]
		buf = strconv.AppendFloat(buf[:0], a[0][k], 'g', -1, 64)
		buf = append(buf, ',')
		buf = append(buf, names[best]...)
		for _, col := range cols {
			buf = append(buf, ',')
			if len(a[col]) > 0 {
				buf = strconv.AppendFloat(buf, a[col][k], 'g', -1, 64)
			}
		}
		buf = append(buf, '\n')
		bw.Write(buf)
	}
	return bw.Flush()
}

// checkCSV reports why c cannot be written, or returns the sample columns
// (indices into captureColumns, without time_s) to write.
func checkCSV(c *kinchainv1.Capture) ([]int, error) {
	if err := checkText("capture_id", c.GetCaptureId()); err != nil {
		return nil, err
	}
	if err := checkText("club", c.GetClub()); err != nil {
		return nil, err
	}
	if _, ok := kinchainv1.Handedness_name[int32(c.GetHandedness())]; !ok {
		return nil, fmt.Errorf("handedness: unknown value %d", int32(c.GetHandedness()))
	}
	for k, v := range c.GetMetadata() {
		if err := checkKey(k); err != nil {
			return nil, err
		}
		if err := checkText(fmt.Sprintf("metadata[%q]", k), v); err != nil {
			return nil, err
		}
	}
	var present [len(captureColumns)]bool
	seen := map[kinchainv1.Segment]int{}
	for i, t := range c.GetTracks() {
		s := t.GetSegment()
		if SegmentName(s) == "" {
			return nil, fmt.Errorf("tracks[%d].segment: unknown segment %d", i, int32(s))
		}
		if j, dup := seen[s]; dup {
			return nil, fmt.Errorf("tracks[%d].segment: %s is also tracks[%d]; the CSV format holds one track per segment", i, SegmentName(s), j)
		}
		seen[s] = i
		a := trackColumns(t)
		n := len(a[0])
		if n == 0 {
			return nil, fmt.Errorf("tracks[%d].time_s: no samples; the CSV format has no empty tracks", i)
		}
		for k := 1; k < len(a); k++ {
			if m := len(a[k]); m != 0 && m != n {
				return nil, fmt.Errorf("tracks[%d].%s: %d entries, but time_s has %d", i, captureColumns[k], m, n)
			}
			if len(a[k]) > 0 {
				present[k] = true
			}
		}
		for _, g := range captureGroups {
			for _, k := range g[1:] {
				if (len(a[k]) > 0) != (len(a[g[0]]) > 0) {
					return nil, fmt.Errorf("tracks[%d]: %s is only partly present", i, strings.Join(names(g), ", "))
				}
			}
		}
	}
	if !present[1] && !(present[5] && present[8]) {
		// The reader wants orientation columns in the header; tracks
		// without them leave the cells empty (validation rejects them later).
		present[1], present[2], present[3], present[4] = true, true, true, true
	}
	var cols []int
	for k := 1; k < len(present); k++ {
		if present[k] {
			cols = append(cols, k)
		}
	}
	return cols, nil
}

func names(g []int) []string {
	s := make([]string, len(g))
	for i, k := range g {
		s[i] = captureColumns[k]
	}
	return s
}

// checkText reports a string the metadata line cannot carry unchanged.
func checkText(field, v string) error {
	switch {
	case !utf8.ValidString(v):
		return fmt.Errorf("%s: not valid UTF-8", field)
	case strings.ContainsAny(v, "\r\n"):
		return fmt.Errorf("%s: contains a line break", field)
	case strings.Trim(v, " \t") != v:
		return fmt.Errorf("%s: begins or ends with a blank, which the reader drops", field)
	}
	return nil
}

// checkKey reports a metadata key the reader would not return as metadata.
func checkKey(k string) error {
	if k == "" {
		return errors.New("metadata: empty key")
	}
	for i := 0; i < len(k); i++ {
		c := k[i]
		if !(c >= 'a' && c <= 'z' || c >= 'A' && c <= 'Z' || c >= '0' && c <= '9' || c == '_' || c == '.' || c == '-') {
			return fmt.Errorf("metadata[%q]: keys are letters, digits and _ . - only", k)
		}
	}
	lower := strings.ToLower(k)
	if slices.Contains(reservedMetadata, lower) || strings.HasPrefix(lower, "mounting.") {
		return fmt.Errorf("metadata[%q]: the key has a meaning of its own in the CSV format", k)
	}
	return nil
}
