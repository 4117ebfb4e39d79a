package server

import (
	"bytes"
	"strconv"

	"google.golang.org/protobuf/encoding/protojson"
	"google.golang.org/protobuf/proto"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
)

// A JSON capture is almost all sample arrays: 18,000 samples of six
// tracks are 90,000 numbers, and protojson spends ~2 µs on each (reflection
// per list element), four times the whole analysis. decodeRequestJSON
// parses those arrays itself and leaves everything else to protojson:
//
//   - the request with capture.tracks replaced by [] goes to protojson;
//   - each track's numeric arrays (time_s, qw … pz, by proto or JSON name)
//     are parsed here, the track's other members go to protojson;
//   - anything unusual — a key with an escape, a duplicate key, a null or a
//     string in a sample array (protojson's "NaN", "Infinity", quoted
//     numbers), a number outside RFC 8259's grammar or float64's range, any
//     syntax error — abandons the fast path, and protojson decodes the whole
//     body, so that results and error messages are protojson's own.
//
// The fast path's results are checked against protojson's in
// fastjson_test.go (table and fuzz test).

// trackArrays maps the proto and JSON names of Track's repeated double
// fields to the field.
var trackArrays = func() map[string]int {
	names := [][2]string{
		{"time_s", "timeS"}, {"qw", "qw"}, {"qx", "qx"}, {"qy", "qy"}, {"qz", "qz"},
		{"gx", "gx"}, {"gy", "gy"}, {"gz", "gz"}, {"ax", "ax"}, {"ay", "ay"}, {"az", "az"},
		{"mx", "mx"}, {"my", "my"}, {"mz", "mz"}, {"px", "px"}, {"py", "py"}, {"pz", "pz"},
	}
	m := map[string]int{}
	for i, n := range names {
		m[n[0]], m[n[1]] = i, i
	}
	return m
}()

// setTrackArray stores a parsed array in field i of t (trackArrays order).
func setTrackArray(t *kinchainv1.Track, i int, v []float64) {
	switch i {
	case 0:
		t.TimeS = v
	case 1:
		t.Qw = v
	case 2:
		t.Qx = v
	case 3:
		t.Qy = v
	case 4:
		t.Qz = v
	case 5:
		t.Gx = v
	case 6:
		t.Gy = v
	case 7:
		t.Gz = v
	case 8:
		t.Ax = v
	case 9:
		t.Ay = v
	case 10:
		t.Az = v
	case 11:
		t.Mx = v
	case 12:
		t.My = v
	case 13:
		t.Mz = v
	case 14:
		t.Px = v
	case 15:
		t.Py = v
	case 16:
		t.Pz = v
	}
}

// decodeRequestJSON unmarshals protojson b into m (see above).
func decodeRequestJSON(b []byte, opts protojson.UnmarshalOptions, m *kinchainv1.AnalyzeCaptureRequest) error {
	if fastRequest(b, opts, m) {
		return nil
	}
	proto.Reset(m)
	return opts.Unmarshal(b, m)
}

// fastRequest is the fast path; false means "use protojson".
func fastRequest(b []byte, opts protojson.UnmarshalOptions, m *kinchainv1.AnalyzeCaptureRequest) bool {
	// Locate capture.tracks.
	capStart, _, ok := member(b, 0, "capture")
	if !ok || capStart < 0 {
		return false
	}
	trStart, trEnd, ok := member(b, capStart, "tracks")
	if !ok || trStart < 0 || b[trStart] != '[' {
		return false
	}
	rest := make([]byte, 0, len(b)-(trEnd-trStart)+2)
	rest = append(append(append(rest, b[:trStart]...), "[]"...), b[trEnd:]...)
	if err := opts.Unmarshal(rest, m); err != nil || m.Capture == nil {
		return false
	}
	var tracks []*kinchainv1.Track
	var other []byte
	i := skipSpace(b, trStart+1)
	if i == trEnd-1 {
		return true // "tracks": []
	}
	for {
		if i >= len(b) || b[i] != '{' {
			return false
		}
		t := &kinchainv1.Track{}
		var seen [17]bool
		other = append(other[:0], '{')
		j := skipSpace(b, i+1)
		if j < len(b) && b[j] == '}' {
			j++
		} else {
			for {
				key, k, ok := plainKey(b, j)
				if !ok {
					return false
				}
				vs := skipSpace(b, k)
				ve, ok := skipValue(b, vs)
				if !ok {
					return false
				}
				if f, isArr := trackArrays[key]; isArr {
					if seen[f] {
						return false
					}
					seen[f] = true
					v, ok := numbers(b[vs:ve])
					if !ok {
						return false
					}
					setTrackArray(t, f, v)
				} else {
					if len(other) > 1 {
						other = append(other, ',')
					}
					other = append(other, b[j:ve]...)
				}
				j = skipSpace(b, ve)
				if j >= len(b) {
					return false
				}
				if b[j] == '}' {
					j++
					break
				}
				if b[j] != ',' {
					return false
				}
				j = skipSpace(b, j+1)
			}
		}
		if len(other) > 1 {
			other = append(other, '}')
			// Unmarshal resets its target: decode into a scratch track and
			// move the arrays over.
			o := &kinchainv1.Track{}
			if err := opts.Unmarshal(other, o); err != nil {
				return false
			}
			o.TimeS, o.Qw, o.Qx, o.Qy, o.Qz = t.TimeS, t.Qw, t.Qx, t.Qy, t.Qz
			o.Gx, o.Gy, o.Gz, o.Ax, o.Ay, o.Az = t.Gx, t.Gy, t.Gz, t.Ax, t.Ay, t.Az
			o.Mx, o.My, o.Mz, o.Px, o.Py, o.Pz = t.Mx, t.My, t.Mz, t.Px, t.Py, t.Pz
			t = o
		}
		tracks = append(tracks, t)
		i = skipSpace(b, j)
		if i >= len(b) {
			return false
		}
		if b[i] == ']' {
			if i != trEnd-1 {
				return false
			}
			break
		}
		if b[i] != ',' {
			return false
		}
		i = skipSpace(b, i+1)
	}
	m.Capture.Tracks = tracks
	return true
}

// member finds key in the object starting at b[at] (after white space) and
// returns the span of its value; start < 0 when the key is absent. ok is
// false for a syntax error, a key with an escape, a duplicate key or a
// value that is not an object/array where one is searched in.
func member(b []byte, at int, key string) (start, end int, ok bool) {
	i := skipSpace(b, at)
	if i >= len(b) || b[i] != '{' {
		return 0, 0, false
	}
	start = -1
	i = skipSpace(b, i+1)
	if i < len(b) && b[i] == '}' {
		return -1, -1, true
	}
	for {
		k, j, ok := plainKey(b, i)
		if !ok {
			return 0, 0, false
		}
		vs := skipSpace(b, j)
		ve, ok := skipValue(b, vs)
		if !ok {
			return 0, 0, false
		}
		if k == key {
			if start >= 0 {
				return 0, 0, false
			}
			start, end = vs, ve
		}
		i = skipSpace(b, ve)
		if i >= len(b) {
			return 0, 0, false
		}
		if b[i] == '}' {
			return start, end, true
		}
		if b[i] != ',' {
			return 0, 0, false
		}
		i = skipSpace(b, i+1)
	}
}

// plainKey reads `"key" :` at b[i] and returns the key and the index after
// the colon; ok is false unless the key is a string without escapes.
func plainKey(b []byte, i int) (string, int, bool) {
	if i >= len(b) || b[i] != '"' {
		return "", 0, false
	}
	e := bytes.IndexByte(b[i+1:], '"')
	if e < 0 {
		return "", 0, false
	}
	k := b[i+1 : i+1+e]
	if bytes.IndexByte(k, '\\') >= 0 {
		return "", 0, false
	}
	for _, c := range k {
		if c < 0x20 {
			return "", 0, false
		}
	}
	j := skipSpace(b, i+2+e)
	if j >= len(b) || b[j] != ':' {
		return "", 0, false
	}
	return string(k), j + 1, true
}

func skipSpace(b []byte, i int) int {
	for i < len(b) && (b[i] == ' ' || b[i] == '\t' || b[i] == '\n' || b[i] == '\r') {
		i++
	}
	return i
}

// skipValue returns the index just past the JSON value at b[i]; ok is
// false for a syntax error. Strings and nesting are followed exactly;
// literals and numbers are checked by the caller or by protojson later.
func skipValue(b []byte, i int) (int, bool) {
	if i >= len(b) {
		return 0, false
	}
	switch b[i] {
	case '"':
		for j := i + 1; j < len(b); j++ {
			switch b[j] {
			case '\\':
				j++
			case '"':
				return j + 1, true
			}
		}
		return 0, false
	case '{', '[':
		depth := 0
		for j := i; j < len(b); j++ {
			switch b[j] {
			case '"':
				e, ok := skipValue(b, j)
				if !ok {
					return 0, false
				}
				j = e - 1
			case '{', '[':
				depth++
			case '}', ']':
				depth--
				if depth == 0 {
					return j + 1, true
				}
			}
		}
		return 0, false
	default:
		j := i
		for j < len(b) && !(b[j] == ',' || b[j] == '}' || b[j] == ']' || b[j] == ' ' || b[j] == '\t' || b[j] == '\n' || b[j] == '\r') {
			j++
		}
		if j == i {
			return 0, false
		}
		return j, true
	}
}

// numbers parses a JSON array of numbers; ok is false for anything else
// (including null, strings and numbers outside the JSON grammar or the
// float64 range).
func numbers(b []byte) ([]float64, bool) {
	if len(b) < 2 || b[0] != '[' || b[len(b)-1] != ']' {
		return nil, false
	}
	n := bytes.Count(b, []byte{','}) + 1
	out := make([]float64, 0, n)
	i := skipSpace(b, 1)
	if i == len(b)-1 {
		return nil, true
	}
	for {
		j := i
		for j < len(b) && !(b[j] == ',' || b[j] == ']' || b[j] == ' ' || b[j] == '\t' || b[j] == '\n' || b[j] == '\r') {
			j++
		}
		tok := b[i:j]
		if !jsonNumber(tok) {
			return nil, false
		}
		v, err := strconv.ParseFloat(string(tok), 64)
		if err != nil {
			return nil, false
		}
		out = append(out, v)
		i = skipSpace(b, j)
		if i >= len(b) {
			return nil, false
		}
		if b[i] == ']' {
			if i != len(b)-1 {
				return nil, false
			}
			return out, true
		}
		if b[i] != ',' {
			return nil, false
		}
		i = skipSpace(b, i+1)
	}
}

// jsonNumber reports whether tok is a number in RFC 8259's grammar:
// -? (0 | [1-9][0-9]*) (. [0-9]+)? ([eE] [+-]? [0-9]+)?
func jsonNumber(tok []byte) bool {
	i := 0
	if i < len(tok) && tok[i] == '-' {
		i++
	}
	switch {
	case i < len(tok) && tok[i] == '0':
		i++
	case i < len(tok) && tok[i] >= '1' && tok[i] <= '9':
		for i < len(tok) && tok[i] >= '0' && tok[i] <= '9' {
			i++
		}
	default:
		return false
	}
	if i < len(tok) && tok[i] == '.' {
		i++
		d := i
		for i < len(tok) && tok[i] >= '0' && tok[i] <= '9' {
			i++
		}
		if i == d {
			return false
		}
	}
	if i < len(tok) && (tok[i] == 'e' || tok[i] == 'E') {
		i++
		if i < len(tok) && (tok[i] == '+' || tok[i] == '-') {
			i++
		}
		d := i
		for i < len(tok) && tok[i] >= '0' && tok[i] <= '9' {
			i++
		}
		if i == d {
			return false
		}
	}
	return i == len(tok)
}
