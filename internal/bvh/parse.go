package bvh

import (
	"bufio"
	"errors"
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"

	"gonum.org/v1/gonum/spatial/r3"
)

// Channel is one motion channel of a joint.
type Channel int

// The six BVH channels. Positions are in the file's length unit, rotations
// in degrees.
const (
	Xposition Channel = iota + 1
	Yposition
	Zposition
	Xrotation
	Yrotation
	Zrotation
)

var channelNames = map[string]Channel{
	"xposition": Xposition, "yposition": Yposition, "zposition": Zposition,
	"xrotation": Xrotation, "yrotation": Yrotation, "zrotation": Zrotation,
}

// String returns the channel's BVH name.
func (c Channel) String() string {
	switch c {
	case Xposition:
		return "Xposition"
	case Yposition:
		return "Yposition"
	case Zposition:
		return "Zposition"
	case Xrotation:
		return "Xrotation"
	case Yrotation:
		return "Yrotation"
	case Zrotation:
		return "Zrotation"
	}
	return fmt.Sprintf("Channel(%d)", int(c))
}

// Limits on what Parse accepts.
const (
	// MaxJoints bounds the number of ROOT and JOINT entries.
	MaxJoints = 1024
	// MaxLineBytes bounds the length of one line.
	MaxLineBytes = 16 << 20
)

// Joint is one ROOT or JOINT of the hierarchy.
type Joint struct {
	Name string
	// Parent is the index of the parent joint in File.Joints, −1 for a root.
	// Parents precede their children.
	Parent int
	// Offset is the joint's position relative to its parent in the parent's
	// frame (file units), with all channels zero (the rest pose).
	Offset r3.Vec
	// Channels are the joint's channels in file order.
	Channels []Channel
	// Column is the index of the joint's first channel within a frame.
	Column int
	// EndSite is the offset of the joint's End Site, or nil.
	EndSite *r3.Vec
	// Line is the 1-based line of the joint's ROOT or JOINT keyword.
	Line int
}

// File is a parsed BVH file.
type File struct {
	// Joints in file (depth-first) order.
	Joints []Joint
	// FrameTime is the sampling interval, s.
	FrameTime float64
	// Frames holds one row of channel values per frame, NumChannels each.
	Frames [][]float64
	// channels is the number of values per frame.
	channels int
}

// NumChannels returns the number of channel values in each frame.
func (f *File) NumChannels() int { return f.channels }

// Lookup returns the index of the joint named name.
func (f *File) Lookup(name string) (int, bool) {
	for i := range f.Joints {
		if f.Joints[i].Name == name {
			return i, true
		}
	}
	return -1, false
}

// ParseError reports malformed input: the 1-based line, the BVH element
// concerned and what is wrong.
type ParseError struct {
	Line    int
	Element string
	Msg     string
}

func (e *ParseError) Error() string {
	return fmt.Sprintf("bvh: line %d: %s: %s", e.Line, e.Element, e.Msg)
}

type token struct {
	s    string
	line int
}

// lexer splits the hierarchy into tokens, treating braces as tokens of their
// own, and hands the MOTION section over line by line.
type lexer struct {
	sc   *bufio.Scanner
	line int
	buf  []token
	eof  bool
}

func (l *lexer) readLine() (string, bool, error) {
	if !l.sc.Scan() {
		if err := l.sc.Err(); err != nil {
			if errors.Is(err, bufio.ErrTooLong) {
				return "", false, &ParseError{Line: l.line + 1, Element: "line", Msg: fmt.Sprintf("longer than %d bytes", MaxLineBytes)}
			}
			return "", false, err
		}
		return "", false, nil
	}
	l.line++
	// CRLF and LF line endings (and a stray CR) are all accepted.
	return strings.TrimRight(l.sc.Text(), "\r"), true, nil
}

func (l *lexer) next() (token, error) {
	for len(l.buf) == 0 {
		if l.eof {
			return token{line: l.line}, nil
		}
		s, ok, err := l.readLine()
		if err != nil {
			return token{}, err
		}
		if !ok {
			l.eof = true
			continue
		}
		s = strings.NewReplacer("{", " { ", "}", " } ").Replace(s)
		for _, f := range strings.Fields(s) {
			l.buf = append(l.buf, token{s: f, line: l.line})
		}
	}
	t := l.buf[0]
	l.buf = l.buf[1:]
	return t, nil
}

// restOfLine returns the tokens left on the line of the last token.
func (l *lexer) restOfLine(line int) []token {
	n := 0
	for n < len(l.buf) && l.buf[n].line == line {
		n++
	}
	out := l.buf[:n]
	l.buf = l.buf[n:]
	return out
}

func (l *lexer) expect(want, element string) (token, error) {
	t, err := l.next()
	if err != nil {
		return t, err
	}
	if !strings.EqualFold(t.s, want) {
		return t, &ParseError{Line: t.line, Element: element, Msg: fmt.Sprintf("expected %q, found %s", want, quoteTok(t))}
	}
	return t, nil
}

func quoteTok(t token) string {
	if t.s == "" {
		return "end of file"
	}
	return strconv.Quote(t.s)
}

func (l *lexer) float(element string) (float64, error) {
	t, err := l.next()
	if err != nil {
		return 0, err
	}
	v, err := parseFloat(t.s)
	if err != nil {
		return 0, &ParseError{Line: t.line, Element: element, Msg: fmt.Sprintf("%s is not a finite number", quoteTok(t))}
	}
	return v, nil
}

func parseFloat(s string) (float64, error) {
	v, err := strconv.ParseFloat(s, 64)
	if err != nil {
		return 0, err
	}
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return 0, errors.New("not finite")
	}
	return v, nil
}

func (l *lexer) offset(element string) (r3.Vec, error) {
	if _, err := l.expect("OFFSET", element); err != nil {
		return r3.Vec{}, err
	}
	var v [3]float64
	for i := range v {
		x, err := l.float(element + " OFFSET")
		if err != nil {
			return r3.Vec{}, err
		}
		v[i] = x
	}
	return r3.Vec{X: v[0], Y: v[1], Z: v[2]}, nil
}

// Parse reads a BVH file. Errors are *ParseError values naming the line and
// the element, except for read errors from r.
func Parse(r io.Reader) (*File, error) {
	sc := bufio.NewScanner(r)
	sc.Buffer(make([]byte, 0, 64<<10), MaxLineBytes)
	l := &lexer{sc: sc}
	f := &File{}
	if _, err := l.expect("HIERARCHY", "header"); err != nil {
		return nil, err
	}
	t, err := l.next()
	if err != nil {
		return nil, err
	}
	for strings.EqualFold(t.s, "ROOT") {
		if err := f.parseJoint(l, t, -1); err != nil {
			return nil, err
		}
		if t, err = l.next(); err != nil {
			return nil, err
		}
	}
	if len(f.Joints) == 0 {
		return nil, &ParseError{Line: t.line, Element: "HIERARCHY", Msg: fmt.Sprintf("expected ROOT, found %s", quoteTok(t))}
	}
	if !strings.EqualFold(t.s, "MOTION") {
		return nil, &ParseError{Line: t.line, Element: "HIERARCHY", Msg: fmt.Sprintf("expected ROOT or MOTION, found %s", quoteTok(t))}
	}
	if err := f.parseMotion(l); err != nil {
		return nil, err
	}
	return f, nil
}

func (f *File) parseJoint(l *lexer, kw token, parent int) error {
	if len(f.Joints) >= MaxJoints {
		return &ParseError{Line: kw.line, Element: kw.s, Msg: fmt.Sprintf("more than %d joints", MaxJoints)}
	}
	nameToks := l.restOfLine(kw.line)
	if len(nameToks) == 0 || nameToks[0].s == "{" {
		return &ParseError{Line: kw.line, Element: kw.s, Msg: "missing joint name"}
	}
	if last := nameToks[len(nameToks)-1]; last.s == "{" {
		// "JOINT name {" on one line: give the brace back.
		nameToks = nameToks[:len(nameToks)-1]
		l.buf = append([]token{last}, l.buf...)
	}
	names := make([]string, len(nameToks))
	for i, t := range nameToks {
		names[i] = t.s
	}
	j := Joint{Name: strings.Join(names, " "), Parent: parent, Line: kw.line, Column: f.channels}
	if _, dup := f.Lookup(j.Name); dup {
		return &ParseError{Line: kw.line, Element: kw.s + " " + j.Name, Msg: "joint name used twice"}
	}
	el := kw.s + " " + j.Name
	if _, err := l.expect("{", el); err != nil {
		return err
	}
	off, err := l.offset(el)
	if err != nil {
		return err
	}
	j.Offset = off
	t, err := l.next()
	if err != nil {
		return err
	}
	if strings.EqualFold(t.s, "CHANNELS") {
		nt, err := l.next()
		if err != nil {
			return err
		}
		n, err := strconv.Atoi(nt.s)
		if err != nil || n < 0 || n > 6 {
			return &ParseError{Line: nt.line, Element: el + " CHANNELS", Msg: fmt.Sprintf("channel count %s is not 0..6", quoteTok(nt))}
		}
		seen := map[Channel]bool{}
		for i := 0; i < n; i++ {
			ct, err := l.next()
			if err != nil {
				return err
			}
			c, ok := channelNames[strings.ToLower(ct.s)]
			if !ok {
				return &ParseError{Line: ct.line, Element: el + " CHANNELS", Msg: fmt.Sprintf("unknown channel %s", quoteTok(ct))}
			}
			if seen[c] {
				return &ParseError{Line: ct.line, Element: el + " CHANNELS", Msg: fmt.Sprintf("channel %s listed twice", c)}
			}
			seen[c] = true
			j.Channels = append(j.Channels, c)
		}
		f.channels += n
		if t, err = l.next(); err != nil {
			return err
		}
	}
	idx := len(f.Joints)
	f.Joints = append(f.Joints, j)
	for {
		switch {
		case t.s == "}":
			return nil
		case strings.EqualFold(t.s, "JOINT"):
			if err := f.parseJoint(l, t, idx); err != nil {
				return err
			}
		case strings.EqualFold(t.s, "End"):
			if _, err := l.expect("Site", el+" End Site"); err != nil {
				return err
			}
			if _, err := l.expect("{", el+" End Site"); err != nil {
				return err
			}
			off, err := l.offset(el + " End Site")
			if err != nil {
				return err
			}
			if _, err := l.expect("}", el+" End Site"); err != nil {
				return err
			}
			if f.Joints[idx].EndSite != nil {
				return &ParseError{Line: t.line, Element: el, Msg: "more than one End Site"}
			}
			f.Joints[idx].EndSite = &off
		default:
			return &ParseError{Line: t.line, Element: el, Msg: fmt.Sprintf("expected JOINT, End Site or }, found %s", quoteTok(t))}
		}
		if t, err = l.next(); err != nil {
			return err
		}
	}
}

// field reads a "Name: value" line of the MOTION header.
func (l *lexer) field(name string) (string, int, error) {
	var s string
	var line int
	if len(l.buf) > 0 {
		// Tokens left over on the MOTION line itself.
		toks := l.restOfLine(l.buf[0].line)
		parts := make([]string, len(toks))
		for i, t := range toks {
			parts[i] = t.s
		}
		s, line = strings.Join(parts, " "), toks[0].line
	} else {
		for {
			var ok bool
			var err error
			s, ok, err = l.readLine()
			if err != nil {
				return "", 0, err
			}
			if !ok {
				return "", l.line, &ParseError{Line: l.line, Element: "MOTION", Msg: fmt.Sprintf("missing %q", name+":")}
			}
			line = l.line
			if strings.TrimSpace(s) != "" {
				break
			}
		}
	}
	rest, ok := cutPrefixFold(strings.TrimSpace(s), name)
	rest = strings.TrimSpace(rest)
	if !ok || !strings.HasPrefix(rest, ":") {
		return "", line, &ParseError{Line: line, Element: "MOTION", Msg: fmt.Sprintf("expected %q, found %q", name+":", s)}
	}
	return strings.TrimSpace(rest[1:]), line, nil
}

func cutPrefixFold(s, prefix string) (string, bool) {
	if len(s) < len(prefix) || !strings.EqualFold(s[:len(prefix)], prefix) {
		return s, false
	}
	return s[len(prefix):], true
}

func (f *File) parseMotion(l *lexer) error {
	v, line, err := l.field("Frames")
	if err != nil {
		return err
	}
	declared := line
	n, err := strconv.Atoi(v)
	if err != nil || n < 0 {
		return &ParseError{Line: line, Element: "Frames", Msg: fmt.Sprintf("%q is not a frame count", v)}
	}
	v, line, err = l.field("Frame Time")
	if err != nil {
		return err
	}
	dt, err := parseFloat(v)
	if err != nil || dt <= 0 {
		return &ParseError{Line: line, Element: "Frame Time", Msg: fmt.Sprintf("%q is not a positive interval", v)}
	}
	f.FrameTime = dt
	// The declared count only sizes a bounded initial allocation.
	capHint := 1 << 20
	if f.channels > 0 && n < capHint/f.channels {
		capHint = n * f.channels
	}
	flat := make([]float64, 0, capHint)
	rows := 0
	for {
		s, ok, err := l.readLine()
		if err != nil {
			return err
		}
		if !ok {
			break
		}
		fields := strings.Fields(s)
		if len(fields) == 0 {
			continue
		}
		if rows == n {
			return &ParseError{Line: l.line, Element: "MOTION", Msg: fmt.Sprintf("more frames than the %d declared on line %d", n, declared)}
		}
		if len(fields) != f.channels {
			return &ParseError{Line: l.line, Element: fmt.Sprintf("frame %d", rows), Msg: fmt.Sprintf("%d values, want %d (one per channel)", len(fields), f.channels)}
		}
		for k, s := range fields {
			x, err := parseFloat(s)
			if err != nil {
				return &ParseError{Line: l.line, Element: fmt.Sprintf("frame %d", rows), Msg: fmt.Sprintf("value %d (%s of %s) %q is not a finite number", k, f.channelName(k), f.channelJoint(k), s)}
			}
			flat = append(flat, x)
		}
		rows++
	}
	if rows != n {
		return &ParseError{Line: l.line, Element: "MOTION", Msg: fmt.Sprintf("%d frames, but %d declared on line %d", rows, n, declared)}
	}
	f.Frames = make([][]float64, n)
	for i := range f.Frames {
		f.Frames[i] = flat[i*f.channels : (i+1)*f.channels : (i+1)*f.channels]
	}
	return nil
}

// channelJoint returns the name of the joint owning frame column k.
func (f *File) channelJoint(k int) string {
	for i := len(f.Joints) - 1; i >= 0; i-- {
		if f.Joints[i].Column <= k && k < f.Joints[i].Column+len(f.Joints[i].Channels) {
			return f.Joints[i].Name
		}
	}
	return "?"
}

func (f *File) channelName(k int) string {
	for i := range f.Joints {
		j := &f.Joints[i]
		if j.Column <= k && k < j.Column+len(j.Channels) {
			return j.Channels[k-j.Column].String()
		}
	}
	return "?"
}
