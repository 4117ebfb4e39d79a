package decode

import (
	"bufio"
	"bytes"
	"errors"
	"fmt"
	"io"
	"math/bits"
	"slices"
	"sort"
	"strconv"
	"strings"
	"unicode/utf8"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/validate"
)

// Column kinds; the first seventeen are the Track arrays in field order.
const (
	colTime = iota
	colQw
	colQx
	colQy
	colQz
	colGx
	colGy
	colGz
	colAx
	colAy
	colAz
	colMx
	colMy
	colMz
	colPx
	colPy
	colPz
	colSegment
	nCols
)

// colNames are the CSV column names, indexed by kind.
var colNames = [nCols]string{
	"time_s", "qw", "qx", "qy", "qz", "gx", "gy", "gz", "ax", "ay", "az",
	"mx", "my", "mz", "px", "py", "pz", "segment",
}

// colGroups are the columns that come together.
var colGroups = [...][]int{
	{colQw, colQx, colQy, colQz},
	{colGx, colGy, colGz},
	{colAx, colAy, colAz},
	{colMx, colMy, colMz},
	{colPx, colPy, colPz},
}

const knownColumns = "time_s (s), segment, qw qx qy qz, gx gy gz (rad/s), ax ay az (m/s²), mx my mz, px py pz (m)"

// MaxLineBytes is the longest CSV line accepted, bytes.
const MaxLineBytes = 64 << 10

// Metadata keys with a meaning of their own; every other "# key: value"
// line goes to Capture.metadata. mounting.<segment> is a family.
const (
	keyCaptureID  = "capture_id"
	keyHandedness = "handedness"
	keyClub       = "club"
	keyHeading    = "target_heading_deg"
	keyNeutral    = "neutral"
	keySegment    = "segment"
	keyMounting   = "mounting"
)

var reservedKeys = []string{keyCaptureID, keyHandedness, keyClub, keyHeading, keyNeutral, keySegment, keyMounting}

var segmentsByName = func() map[string]kinchainv1.Segment {
	m := map[string]kinchainv1.Segment{}
	for n, name := range kinchainv1.Segment_name {
		if n != 0 && int(n) <= maxSegment {
			m[strings.ToLower(strings.TrimPrefix(name, "SEGMENT_"))] = kinchainv1.Segment(n)
		}
	}
	return m
}()

// maxSegment is the largest Segment value; checked in the tests.
const maxSegment = int(kinchainv1.Segment_SEGMENT_CLUB)

// segmentList is the accepted segment names in enum order, for messages.
var segmentList = func() string {
	names := make([]string, 0, len(segmentsByName))
	for n := int32(1); ; n++ {
		name, ok := kinchainv1.Segment_name[n]
		if !ok {
			break
		}
		names = append(names, strings.ToLower(strings.TrimPrefix(name, "SEGMENT_")))
	}
	return strings.Join(names, ", ")
}()

// CSV decodes a capture in kinchain's CSV format from r.
//
// The format is long: one row per sample, a header row naming the columns
// (any order), rows of different segments interleaved in any way, each
// segment at its own rate. Columns: time_s (s, required), segment, qw qx qy
// qz (sensor→world quaternion), gx gy gz (gyroscope, rad/s), ax ay az
// (accelerometer, m/s²), mx my mz (magnetometer), px py pz (position, m).
// Quaternion columns or both gyroscope and accelerometer columns must be
// present; a group is present whole or not at all. segment holds lower-case
// names (pelvis, thorax, head, lead_upper_arm, lead_forearm, lead_hand,
// trail_upper_arm, trail_forearm, trail_hand, club). A file without a
// segment column holds one track and names it in a "# segment: NAME" line;
// there is no default segment.
//
// Fields are separated by commas; spaces around a field are ignored; there
// is no quoting. Blank lines are skipped, a UTF-8 byte order mark is
// dropped, CRLF line ends are accepted. Lines starting with '#' are
// comments; "# key: value" lines above the header row are metadata:
// handedness (right|left), club, capture_id, target_heading_deg (degrees),
// neutral (START:END, s), mounting.<segment> (w x y z), segment (see above);
// any other key goes to Capture.metadata. Metadata below the header row is
// an error. Keys are case-sensitive and each may appear once.
//
// An empty cell means the segment lacks that column: for each segment a
// column is filled on every row or on none. Numbers are parsed by
// strconv.ParseFloat (NaN and Inf parse and are left to validate).
//
// Tracks come out in segment order (pelvis first), whatever the row order.
// The Locator maps (track, sample) of the result to file lines. Reading stops
// with ReasonTooLarge past lim.MaxBytes bytes, lim.MaxSamples rows or
// lim.MaxTracks segments (zero fields: defaults). Every error is a
// *validate.Error naming the column or metadata key and the line.
func CSV(r io.Reader, lim validate.Limits) (*kinchainv1.Capture, validate.Locator, error) {
	lim = lim.WithDefaults()
	p := &csvParser{
		lim:  lim,
		br:   bufio.NewReaderSize(io.LimitReader(r, int64(lim.MaxBytes)+1), MaxLineBytes),
		c:    &kinchainv1.Capture{},
		seen: map[string]int{},
	}
	if err := p.run(); err != nil {
		return nil, nil, err
	}
	return p.finish()
}

type csvParser struct {
	lim  validate.Limits
	br   *bufio.Reader
	c    *kinchainv1.Capture
	line int
	read int

	header    bool
	cols      []int // kind per field position
	present   uint32
	fixedSeg  kinchainv1.Segment // from "# segment:"
	segLine   int
	seen      map[string]int // metadata key → line
	mountings []mounting
	tracks    [maxSegment + 1]*builder // by segment number
	ntracks   int
	samples   int
}

type mounting struct {
	seg  kinchainv1.Segment
	key  string
	line int
	q    *kinchainv1.Quaternion
}

// builder collects one segment's rows.
type builder struct {
	t         *kinchainv1.Track
	dst       [nCols]*[]float64
	mask      uint32 // columns filled on the first row
	firstLine int
	lines     lineRuns
}

func errAt(field string, line int, r validate.Reason, format string, a ...any) *validate.Error {
	return &validate.Error{Field: field, Sample: -1, Line: line, Reason: r, Detail: fmt.Sprintf(format, a...)}
}

func (p *csvParser) run() error {
	for {
		b, err := p.br.ReadSlice('\n')
		if len(b) > 0 {
			p.line++
			p.read += len(b)
			if p.read > p.lim.MaxBytes {
				return errAt("", p.line, validate.ReasonTooLarge, "the input is larger than the limit of %d bytes", p.lim.MaxBytes)
			}
			if errors.Is(err, bufio.ErrBufferFull) {
				return errAt("", p.line, validate.ReasonMalformed, "line longer than %d bytes", MaxLineBytes)
			}
			if p.line == 1 {
				b = bytes.TrimPrefix(b, []byte("\xef\xbb\xbf"))
			}
			if e := p.handle(b); e != nil {
				return e
			}
		}
		switch {
		case err == nil:
		case err == io.EOF:
			return nil
		default:
			return errAt("", p.line, validate.ReasonMalformed, "reading: %v", err)
		}
	}
}

// handle processes one line, with its line end.
func (p *csvParser) handle(b []byte) error {
	if n := len(b); n > 0 && b[n-1] == '\n' {
		b = b[:n-1]
		if n := len(b); n > 0 && b[n-1] == '\r' {
			b = b[:n-1]
		}
	}
	if p.header && len(b) > 0 && b[0] != '#' && b[0] != ' ' && b[0] != '\t' {
		return p.row(b)
	}
	t := trim(b)
	switch {
	case len(t) == 0:
		return nil
	case t[0] == '#':
		return p.comment(t[1:])
	case !p.header:
		return p.parseHeader(t)
	}
	return p.row(b)
}

func trim(b []byte) []byte {
	for len(b) > 0 && (b[0] == ' ' || b[0] == '\t') {
		b = b[1:]
	}
	for len(b) > 0 && (b[len(b)-1] == ' ' || b[len(b)-1] == '\t') {
		b = b[:len(b)-1]
	}
	return b
}

func isKeyChar(c byte) bool {
	return c >= 'a' && c <= 'z' || c >= 'A' && c <= 'Z' || c >= '0' && c <= '9' || c == '_' || c == '.' || c == '-'
}

// comment handles a '#' line (b is what follows the '#').
func (p *csvParser) comment(b []byte) error {
	b = trim(b)
	k := 0
	for k < len(b) && isKeyChar(b[k]) {
		k++
	}
	rest := trim(b[k:])
	if k == 0 || len(rest) == 0 || rest[0] != ':' {
		return nil // a plain comment
	}
	key := string(b[:k])
	val := string(trim(rest[1:]))
	if p.header {
		return errAt(key, p.line, validate.ReasonMalformed, "metadata line below the header row; move it above the header")
	}
	if first, dup := p.seen[key]; dup {
		return errAt(key, p.line, validate.ReasonMalformed, "metadata key given twice (first on line %d)", first)
	}
	p.seen[key] = p.line
	if !utf8.ValidString(val) {
		return errAt(key, p.line, validate.ReasonMalformed, "value is not valid UTF-8")
	}
	return p.metadata(key, val)
}

func (p *csvParser) metadata(key, val string) error {
	lower := strings.ToLower(key)
	switch key {
	case keyCaptureID:
		p.c.CaptureId = val
	case keyClub:
		p.c.Club = val
	case keyHandedness:
		switch val {
		case "right":
			p.c.Handedness = kinchainv1.Handedness_HANDEDNESS_RIGHT
		case "left":
			p.c.Handedness = kinchainv1.Handedness_HANDEDNESS_LEFT
		default:
			return errAt(key, p.line, validate.ReasonBadValue, "%q is neither right nor left", val)
		}
	case keyHeading:
		v, err := parseNumber(val)
		if err != nil {
			return errAt(key, p.line, validate.ReasonMalformed, "%q is not a number of degrees", val)
		}
		p.c.TargetHeadingDeg = &v
	case keyNeutral:
		a, b, ok := strings.Cut(val, ":")
		s, err1 := parseNumber(strings.TrimSpace(a))
		e, err2 := parseNumber(strings.TrimSpace(b))
		if !ok || err1 != nil || err2 != nil {
			return errAt(key, p.line, validate.ReasonMalformed, "%q is not START:END in seconds", val)
		}
		p.c.Neutral = &kinchainv1.TimeWindow{StartS: s, EndS: e}
	case keySegment:
		seg, ok := segmentsByName[val]
		if !ok {
			return errAt(key, p.line, validate.ReasonUnknownSegment, "%s", unknownSegment(val))
		}
		p.fixedSeg, p.segLine = seg, p.line
	case keyMounting:
		return errAt(key, p.line, validate.ReasonBadValue, "name the segment: mounting.<segment>: w x y z")
	default:
		if name, ok := strings.CutPrefix(key, keyMounting+"."); ok {
			return p.parseMounting(key, name, val)
		}
		if slices.Contains(reservedKeys, lower) || strings.HasPrefix(lower, keyMounting+".") {
			return errAt(key, p.line, validate.ReasonBadValue, "metadata keys are case-sensitive; write %s", lower)
		}
		if p.c.Metadata == nil {
			p.c.Metadata = map[string]string{}
		}
		p.c.Metadata[key] = val
	}
	return nil
}

func (p *csvParser) parseMounting(key, name, val string) error {
	seg, ok := segmentsByName[name]
	if !ok {
		return errAt(key, p.line, validate.ReasonUnknownSegment, "%s", unknownSegment(name))
	}
	f := strings.FieldsFunc(val, func(r rune) bool { return r == ' ' || r == '\t' || r == ',' })
	var q [4]float64
	if len(f) != 4 {
		return errAt(key, p.line, validate.ReasonMalformed, "%q is not four numbers w x y z", val)
	}
	for i, s := range f {
		v, err := parseNumber(s)
		if err != nil {
			return errAt(key, p.line, validate.ReasonMalformed, "%q is not four numbers w x y z", val)
		}
		q[i] = v
	}
	p.mountings = append(p.mountings, mounting{seg: seg, key: key, line: p.line, q: &kinchainv1.Quaternion{W: q[0], X: q[1], Y: q[2], Z: q[3]}})
	return nil
}

func unknownSegment(name string) string {
	s := fmt.Sprintf("unknown segment %q; expected one of %s", name, segmentList)
	if _, ok := segmentsByName[strings.ToLower(name)]; ok {
		s += " (names are lower case)"
	}
	return s
}

// parseNumber parses a float64. Overflow yields ±Inf without an error, so
// that validate reports it as not finite, with the sample.
func parseNumber(s string) (float64, error) {
	v, err := strconv.ParseFloat(s, 64)
	if err != nil {
		var ne *strconv.NumError
		if errors.As(err, &ne) && ne.Err == strconv.ErrRange {
			return v, nil
		}
	}
	return v, err
}

func (p *csvParser) parseHeader(b []byte) error {
	first, _, _ := bytes.Cut(b, []byte(","))
	if _, err := parseNumber(string(trim(first))); err == nil {
		return errAt("header", p.line, validate.ReasonMalformed, "the header row is missing: line %d looks like data; the first line that is not a comment names the columns (%s)", p.line, knownColumns)
	}
	var positions [nCols]int
	for i, cell := range bytes.Split(b, []byte(",")) {
		name := string(trim(cell))
		k := slices.Index(colNames[:], name)
		switch {
		case name == "":
			return errAt("header", p.line, validate.ReasonMalformed, "column %d has no name", i+1)
		case k < 0:
			d := "unknown column; known columns: " + knownColumns
			if name[0] == '"' || name[0] == '\'' {
				d += " (quoting is not supported)"
			} else if slices.Contains(colNames[:], strings.ToLower(name)) {
				d += " (names are lower case)"
			}
			return errAt(name, p.line, validate.ReasonUnknownColumn, "%s", d)
		case p.present&(1<<k) != 0:
			return errAt(name, p.line, validate.ReasonDuplicateColumn, "column given twice (columns %d and %d)", positions[k], i+1)
		}
		positions[k] = i + 1
		p.present |= 1 << k
		p.cols = append(p.cols, k)
	}
	if p.present&(1<<colTime) == 0 {
		return errAt("time_s", p.line, validate.ReasonMissingColumn, "no time_s column")
	}
	for _, g := range colGroups {
		if name, have := partial(p.present, g); name != "" {
			return errAt(name, p.line, validate.ReasonMissingColumn, "%s given without %s", strings.Join(have, ", "), name)
		}
	}
	if p.present&(1<<colQw) == 0 && (p.present&(1<<colGx) == 0 || p.present&(1<<colAx) == 0) {
		return errAt("qw", p.line, validate.ReasonMissingColumn, "no orientation columns: give qw, qx, qy, qz, or gx, gy, gz and ax, ay, az")
	}
	hasSeg := p.present&(1<<colSegment) != 0
	switch {
	case !hasSeg && p.fixedSeg == 0:
		return errAt("segment", p.line, validate.ReasonMissingColumn, "no segment column and no '# segment: NAME' line above the header")
	case hasSeg && p.fixedSeg != 0:
		return errAt("segment", p.segLine, validate.ReasonBadValue, "'# segment:' is for files without a segment column, and this one has one")
	}
	p.header = true
	return nil
}

// partial returns the first column of group g missing from mask, and the
// names present, when g is partly in mask; "" otherwise.
func partial(mask uint32, g []int) (string, []string) {
	var have []string
	missing := ""
	for _, k := range g {
		if mask&(1<<k) != 0 {
			have = append(have, colNames[k])
		} else if missing == "" {
			missing = colNames[k]
		}
	}
	if len(have) == 0 {
		return "", nil
	}
	return missing, have
}

// row parses one data row.
func (p *csvParser) row(b []byte) error {
	var vals [nCols]float64
	var filled uint32
	var segCell []byte
	n := len(p.cols)
	j := 0
	for {
		i := bytes.IndexByte(b, ',')
		cell := b
		if i >= 0 {
			cell = b[:i]
		}
		if j >= n {
			return p.fieldCount(j + 1 + bytes.Count(b, []byte(",")))
		}
		cell = trim(cell)
		if k := p.cols[j]; k == colSegment {
			segCell = cell
		} else if len(cell) > 0 {
			v, err := strconv.ParseFloat(string(cell), 64)
			if err != nil && !isRange(err) {
				return errAt(colNames[k], p.line, validate.ReasonMalformed, "%q is not a number", cell)
			}
			vals[k] = v
			filled |= 1 << k
		}
		j++
		if i < 0 {
			break
		}
		b = b[i+1:]
	}
	if j != n {
		return p.fieldCount(j)
	}
	seg := p.fixedSeg
	if seg == 0 {
		s, ok := segmentsByName[string(segCell)]
		if !ok {
			if len(segCell) == 0 {
				return errAt("segment", p.line, validate.ReasonUnknownSegment, "empty segment; expected one of %s", segmentList)
			}
			return errAt("segment", p.line, validate.ReasonUnknownSegment, "%s", unknownSegment(string(segCell)))
		}
		seg = s
	}
	tb := p.tracks[seg]
	if tb == nil {
		var err error
		if tb, err = p.newTrack(seg, filled); err != nil {
			return err
		}
	} else if filled != tb.mask {
		k := bits.TrailingZeros32(filled ^ tb.mask)
		if tb.mask&(1<<k) != 0 {
			return errAt(colNames[k], p.line, validate.ReasonMissingField, "empty, but filled for %s on line %d", segmentName(seg), tb.firstLine)
		}
		return errAt(colNames[k], p.line, validate.ReasonMissingField, "filled, but empty for %s on line %d; a segment has a column on every row or on none", segmentName(seg), tb.firstLine)
	}
	p.samples++
	if p.samples > p.lim.MaxSamples {
		return errAt("", p.line, validate.ReasonTooLarge, "more than the limit of %d samples", p.lim.MaxSamples)
	}
	tb.lines.add(len(tb.t.TimeS), p.line)
	for m := filled; m != 0; m &= m - 1 {
		k := bits.TrailingZeros32(m)
		*tb.dst[k] = append(*tb.dst[k], vals[k])
	}
	return nil
}

func isRange(err error) bool {
	ne, ok := err.(*strconv.NumError)
	return ok && ne.Err == strconv.ErrRange
}

func (p *csvParser) fieldCount(got int) error {
	return errAt("", p.line, validate.ReasonMalformed, "%d fields, but the header has %d", got, len(p.cols))
}

func (p *csvParser) newTrack(seg kinchainv1.Segment, filled uint32) (*builder, error) {
	if filled&(1<<colTime) == 0 {
		return nil, errAt("time_s", p.line, validate.ReasonMissingField, "empty")
	}
	for _, g := range colGroups {
		if name, have := partial(filled, g); name != "" {
			return nil, errAt(name, p.line, validate.ReasonMissingField, "empty while %s are filled", strings.Join(have, ", "))
		}
	}
	if p.ntracks >= p.lim.MaxTracks {
		return nil, errAt("segment", p.line, validate.ReasonTooLarge, "more than the limit of %d segments", p.lim.MaxTracks)
	}
	p.ntracks++
	t := &kinchainv1.Track{Segment: seg}
	tb := &builder{t: t, mask: filled, firstLine: p.line}
	tb.dst = [nCols]*[]float64{
		&t.TimeS, &t.Qw, &t.Qx, &t.Qy, &t.Qz, &t.Gx, &t.Gy, &t.Gz,
		&t.Ax, &t.Ay, &t.Az, &t.Mx, &t.My, &t.Mz, &t.Px, &t.Py, &t.Pz, nil,
	}
	p.tracks[seg] = tb
	return tb, nil
}

func segmentName(s kinchainv1.Segment) string {
	return strings.ToLower(strings.TrimPrefix(s.String(), "SEGMENT_"))
}

func (p *csvParser) finish() (*kinchainv1.Capture, validate.Locator, error) {
	if !p.header {
		return nil, nil, errAt("header", p.line, validate.ReasonMalformed, "no header row: the input has only comments or blank lines")
	}
	for _, m := range p.mountings {
		tb := p.tracks[m.seg]
		if tb == nil {
			return nil, nil, errAt(m.key, m.line, validate.ReasonBadValue, "no rows for segment %s", segmentName(m.seg))
		}
		tb.t.Mounting = m.q
	}
	lm := &LineMap{}
	for _, tb := range p.tracks {
		if tb != nil {
			p.c.Tracks = append(p.c.Tracks, tb.t)
			lm.tracks = append(lm.tracks, tb.lines)
		}
	}
	return p.c, lm, nil
}

// LineMap is the validate.Locator of a decoded CSV file: it maps a sample of
// a track of the decoded capture to the file line it came from.
type LineMap struct {
	tracks []lineRuns
}

// Line returns the 1-based file line of the given sample of the given track
// (indices into the decoded Capture.tracks and their arrays), or 0 when
// there is no such sample.
func (m *LineMap) Line(track, sample int) int {
	if m == nil || track < 0 || track >= len(m.tracks) || sample < 0 {
		return 0
	}
	return m.tracks[track].line(sample)
}

// lineRuns stores sample lines as arithmetic runs: samples
// [r.sample, r.sample+r.n) are on lines r.line + r.stride·(s − r.sample).
// Regularly interleaved files need one run per track.
type lineRuns []lineRun

type lineRun struct{ sample, line, stride, n int }

func (l *lineRuns) add(sample, line int) {
	if k := len(*l); k > 0 {
		r := &(*l)[k-1]
		switch {
		case r.n == 1:
			r.stride, r.n = line-r.line, 2
			return
		case line == r.line+r.stride*r.n:
			r.n++
			return
		}
	}
	*l = append(*l, lineRun{sample: sample, line: line, n: 1})
}

func (l lineRuns) line(sample int) int {
	i := sort.Search(len(l), func(i int) bool { return l[i].sample+l[i].n > sample })
	if i == len(l) || sample < l[i].sample {
		return 0
	}
	r := l[i]
	return r.line + r.stride*(sample-r.sample)
}
