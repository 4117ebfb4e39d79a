package server

import (
	"bytes"
	"math"
	"math/bits"
	"strconv"

	"google.golang.org/protobuf/encoding/protojson"
	"google.golang.org/protobuf/proto"
	"google.golang.org/protobuf/reflect/protoreflect"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/capture"
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
// The body is walked once: the top-level object, the capture object and
// the tracks array member by member, each sample array parsed where it
// lies. Scanning a value to find its end and then again to parse it cost
// as much as the parsing; only small values (the members that are not
// sample arrays) are skipped with skipValue and read again by protojson.
//
// The fast path's results are checked against protojson's in
// fastjson_test.go (table and fuzz test), its numbers against
// strconv.ParseFloat's.

// trackArrays maps the proto and JSON names of Track's repeated double
// fields to their index in capture.TrackArrays.
var trackArrays = func() map[string]int {
	fields := (&kinchainv1.Track{}).ProtoReflect().Descriptor().Fields()
	m := map[string]int{}
	for k, name := range capture.ArrayNames {
		m[name], m[fields.ByName(protoreflect.Name(name)).JSONName()] = k, k
	}
	return m
}()

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
	var (
		sawCapture     bool
		trStart, trEnd = -1, -1
		tracks         []*kinchainv1.Track
	)
	// Only "capture" and its "tracks" are interpreted here, so only they
	// need the duplicate check; a duplicate elsewhere stays in rest, where
	// protojson refuses it.
	_, ok := object(b, 0, func(key string, _, v int) (int, bool) {
		if key != "capture" {
			return skipValue(b, v)
		}
		if sawCapture {
			return 0, false
		}
		sawCapture = true
		return object(b, v, func(key string, _, v int) (int, bool) {
			if key != "tracks" {
				return skipValue(b, v)
			}
			if trStart >= 0 {
				return 0, false
			}
			var e int
			var ok bool
			tracks, e, ok = trackList(b, v, opts)
			trStart, trEnd = v, e
			return e, ok
		})
	})
	if !ok || trStart < 0 {
		return false
	}
	// The walk stops at the top-level '}'; what follows it (garbage, a
	// second value) is in rest, for protojson to refuse.
	rest := make([]byte, 0, len(b)-(trEnd-trStart)+2)
	rest = append(append(append(rest, b[:trStart]...), "[]"...), b[trEnd:]...)
	if err := opts.Unmarshal(rest, m); err != nil || m.Capture == nil {
		return false
	}
	m.Capture.Tracks = tracks
	return true
}

// object walks the JSON object at b[i] (after white space). f is called
// with each member's key, the index of the key's opening quote and the
// index of the value, and returns the index just past the value; object
// returns the index just past the '}'. ok is false for a syntax error, a
// key with an escape, or when f says so.
func object(b []byte, i int, f func(key string, k, v int) (int, bool)) (int, bool) {
	i = skipSpace(b, i)
	if i >= len(b) || b[i] != '{' {
		return 0, false
	}
	i = skipSpace(b, i+1)
	if i < len(b) && b[i] == '}' {
		return i + 1, true
	}
	for {
		key, j, ok := plainKey(b, i)
		if !ok {
			return 0, false
		}
		e, ok := f(key, i, skipSpace(b, j))
		if !ok {
			return 0, false
		}
		i = skipSpace(b, e)
		if i >= len(b) {
			return 0, false
		}
		if b[i] == '}' {
			return i + 1, true
		}
		if b[i] != ',' {
			return 0, false
		}
		i = skipSpace(b, i+1)
	}
}

// trackList parses the JSON array of tracks at b[i] and returns the
// tracks and the index just past the ']'.
func trackList(b []byte, i int, opts protojson.UnmarshalOptions) ([]*kinchainv1.Track, int, bool) {
	if i >= len(b) || b[i] != '[' {
		return nil, 0, false
	}
	i = skipSpace(b, i+1)
	if i < len(b) && b[i] == ']' {
		return nil, i + 1, true
	}
	var tracks []*kinchainv1.Track
	var other []byte // reused: each track's members for protojson
	for {
		t, j, ok := track(b, i, opts, &other)
		if !ok {
			return nil, 0, false
		}
		tracks = append(tracks, t)
		j = skipSpace(b, j)
		if j >= len(b) {
			return nil, 0, false
		}
		if b[j] == ']' {
			return tracks, j + 1, true
		}
		if b[j] != ',' {
			return nil, 0, false
		}
		i = skipSpace(b, j+1)
	}
}

// track parses the JSON track object at b[i] and returns it and the index
// just past the '}'. The sample arrays are parsed here; the other members
// are copied into *other and decoded by protojson, which checks them.
func track(b []byte, i int, opts protojson.UnmarshalOptions, other *[]byte) (*kinchainv1.Track, int, bool) {
	var arrays [capture.NumArrays][]float64
	var seen [capture.NumArrays]bool
	o := append((*other)[:0], '{')
	end, ok := object(b, i, func(key string, k, v int) (int, bool) {
		f, isArr := trackArrays[key]
		if !isArr {
			e, ok := skipValue(b, v)
			if ok {
				if len(o) > 1 {
					o = append(o, ',')
				}
				o = append(o, b[k:e]...)
			}
			return e, ok
		}
		if seen[f] {
			return 0, false
		}
		seen[f] = true
		var e int
		var ok bool
		arrays[f], e, ok = numbers(b, v)
		return e, ok
	})
	*other = o
	if !ok {
		return nil, 0, false
	}
	t := &kinchainv1.Track{}
	if len(o) > 1 {
		o = append(o, '}')
		*other = o
		if err := opts.Unmarshal(o, t); err != nil {
			return nil, 0, false
		}
	}
	capture.SetTrackArrays(t, &arrays) // o held none of them
	return t, end, true
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

// numbers parses the JSON array of numbers at b[i] and returns the values
// and the index just past the ']'; ok is false for anything else
// (including null, strings and numbers outside the JSON grammar or the
// float64 range).
func numbers(b []byte, i int) ([]float64, int, bool) {
	if i >= len(b) || b[i] != '[' {
		return nil, 0, false
	}
	i = skipSpace(b, i+1)
	if i < len(b) && b[i] == ']' {
		return nil, i + 1, true
	}
	// Allocate once, at the final size: in an array of numbers the first
	// ']' closes it and the commas before it separate the numbers.
	// IndexByte and Count are vectorised, a small cost beside the parse
	// (and beside append's copies as it grows). On other input the count
	// is wrong, harmlessly: the parse abandons.
	n := 1
	if e := bytes.IndexByte(b[i:], ']'); e >= 0 {
		n += bytes.Count(b[i:i+e], []byte{','})
	}
	out := make([]float64, 0, n)
	for {
		v, j, ok := number(b, i)
		if !ok {
			return nil, 0, false
		}
		out = append(out, v)
		if j < len(b) && b[j] == ',' { // the usual case, compact JSON
			i = skipSpace(b, j+1)
			continue
		}
		j = skipSpace(b, j)
		if j >= len(b) {
			return nil, 0, false
		}
		if b[j] == ']' {
			return out, j + 1, true
		}
		if b[j] != ',' {
			return nil, 0, false
		}
		i = skipSpace(b, j+1)
	}
}

// number parses the JSON number at b[i] and returns its value, exactly as
// strconv.ParseFloat(…, 64) would, and the index just past it. ok is false
// unless b[i:] starts with a number in RFC 8259's grammar,
//
//	-? (0 | [1-9][0-9]*) (. [0-9]+)? ([eE] [+-]? [0-9]+)?
//
// inside float64's range (ParseFloat's ErrRange). Whatever follows the
// number is the caller's to check.
//
// The one scan that checks the grammar also gathers the number as
// mant × 10^exp, and decimalFloat converts that exactly when it can;
// ParseFloat would scan the digits again, which cost as much as the rest
// of the decode. Numbers it cannot take (more than 19 significant digits,
// larger exponents) go to ParseFloat.
func number(b []byte, i int) (v float64, end int, ok bool) {
	start := i
	neg := i < len(b) && b[i] == '-'
	if neg {
		i++
	}
	// The number is mant × 10^exp while nd ≤ 19: a uint64 holds 19
	// digits, and past them digits are counted but not gathered.
	var mant uint64
	nd, exp := 0, 0 // significant digits; decimal exponent
	switch {
	case i < len(b) && b[i] == '0':
		i++
	case i < len(b) && '1' <= b[i] && b[i] <= '9':
		d := i
		mant, i = digits(b, i, 0, 19)
		nd = i - d
	default:
		return 0, 0, false
	}
	if i < len(b) && b[i] == '.' {
		i++
		d := i
		if mant == 0 { // 0.001: leading zeros are not significant
			for i < len(b) && b[i] == '0' {
				i++
			}
		}
		z := i
		mant, i = digits(b, i, mant, 19-nd)
		if i == d {
			return 0, 0, false
		}
		nd += i - z
		exp = -(i - d)
	}
	clamped := false // exponent too long to gather
	if i < len(b) && (b[i] == 'e' || b[i] == 'E') {
		i++
		eneg := false
		if i < len(b) && (b[i] == '+' || b[i] == '-') {
			eneg = b[i] == '-'
			i++
		}
		d := i
		e := 0
		for ; i < len(b) && '0' <= b[i] && b[i] <= '9'; i++ {
			// Stop before e overflows, and leave a longer exponent to
			// ParseFloat, whose answer is the one to give even where it
			// is off: it stops at 10000 too, so 0.000…0001e100004 (99,999
			// zeros, 1e4) comes out 0. Mere size is not enough to refuse
			// the fast path here, as leading zeros of the fraction can
			// bring a huge exponent back into range.
			if e < 10000 {
				e = e*10 + int(b[i]-'0')
			} else {
				clamped = true
			}
		}
		if i == d {
			return 0, 0, false
		}
		if eneg {
			e = -e
		}
		exp += e
	}
	if nd <= 19 && !clamped {
		if v, ok := decimalFloat(mant, exp, neg); ok {
			return v, i, true
		}
	}
	v, err := strconv.ParseFloat(string(b[start:i]), 64)
	if err != nil {
		return 0, 0, false
	}
	return v, i, true
}

// digits gathers the first max decimal digits at b[i:] into m (m×10 + d
// each) and returns m and the index past the last digit, gathered or not.
// Keeping the count of digits out of the loop leaves it a chain of
// multiply-adds, the fastest part of number.
func digits(b []byte, i int, m uint64, max int) (uint64, int) {
	for end := min(len(b), i+max); i < end && b[i]-'0' <= 9; i++ {
		m = m*10 + uint64(b[i]-'0')
	}
	for i < len(b) && b[i]-'0' <= 9 {
		i++
	}
	return m, i
}

// float64pow10 are the powers of ten that float64 holds exactly
// (5^22 < 2^53 < 5^23).
var float64pow10 = [...]float64{
	1e0, 1e1, 1e2, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8, 1e9, 1e10,
	1e11, 1e12, 1e13, 1e14, 1e15, 1e16, 1e17, 1e18, 1e19, 1e20,
	1e21, 1e22,
}

// uint64pow5 are the powers of five that a uint64 holds (5^27 < 2^64 <
// 5^28).
var uint64pow5 = func() (p [28]uint64) {
	p[0] = 1
	for i := 1; i < len(p); i++ {
		p[i] = p[i-1] * 5
	}
	return p
}()

// decimalFloat returns ±mant × 10^exp rounded to the nearest float64, ties
// to even, as strconv.ParseFloat rounds; ok is false outside the two exact
// methods below, for ParseFloat to take the number.
func decimalFloat(mant uint64, exp int, neg bool) (float64, bool) {
	// Clinger's fast path (strconv's atof64exact): when mant and 10^exp
	// are both float64s, one correctly rounded multiply or divide is the
	// correctly rounded result. This takes short numbers such as time
	// stamps.
	if mant <= 1<<53 { // every integer up to 2^53 is a float64
		f := float64(mant)
		if neg {
			f = -f // also -0 for "-0", as ParseFloat gives
		}
		switch {
		case exp == 0 || mant == 0: // ParseFloat too gives ±0 whatever the exponent
			return f, true
		case 0 < exp && exp <= 22:
			return f * float64pow10[exp], true
		case -22 <= exp && exp < 0:
			return f / float64pow10[-exp], true
		case 22 < exp && exp <= 22+15:
			// 123e25: the product with 10^(exp-22) is exact while it is
			// below 2^53 (an integer then), and it is below 2^53 exactly
			// when the exact product is (rounding is monotonic and 2^53 is
			// a float64); one multiply by 10^22 remains.
			if g := f * float64pow10[exp-22]; math.Abs(g) < 1<<53 {
				return g * float64pow10[22], true
			}
		}
	}
	// Numbers of 17–19 digits, such as most samples of a capture (the
	// shortest text of a float64 has 17 digits at most), are mant × 5^k
	// × 2^k or mant / (5^k × 2^k): in integers, a 128-bit product or a
	// quotient with remainder, exact, then rounded once. The powers of two
	// only move the binary point. The result is a normal float64, between
	// 10^-27 and 2^64 × 10^27.
	if exp < -27 || exp > 27 {
		return 0, false
	}
	var w uint64    // the value is (w + δ) × 2^e2, 0 ≤ δ < 1,
	var sticky bool // δ > 0
	var e2 int
	if exp >= 0 {
		hi, lo := bits.Mul64(mant, uint64pow5[exp])
		// Keep the top 64 bits in w, the rest in sticky.
		z := bits.LeadingZeros64(hi)
		if hi == 0 {
			w, e2 = lo, exp
		} else {
			w, sticky, e2 = hi<<z|lo>>(64-z), lo<<z != 0, exp+64-z
		}
	} else {
		// Shift mant left by s so that the quotient by d = 5^k has 63 or
		// 64 bits: with mant·2^s in [2^63, 2^64) × 2^(len(d)−1) and d in
		// [2^(len(d)−1), 2^len(d)), the quotient is in (2^62, 2^64), and
		// the high word of the dividend stays below d, as Div64 needs.
		d := uint64pow5[-exp]
		s := bits.LeadingZeros64(mant) + bits.Len64(d) - 1
		var hi, lo uint64
		if s < 64 {
			hi, lo = mant>>(64-s), mant<<s
		} else {
			hi, lo = mant<<(s-64), 0
		}
		q, r := bits.Div64(hi, lo, d)
		w, sticky, e2 = q, r != 0, exp-s
	}
	// Round w + δ to 53 bits, to nearest, ties (δ = 0 and the dropped
	// bits exactly half) to even.
	if n := bits.Len64(w); n > 53 {
		drop := n - 53
		rem, half := w&(1<<drop-1), uint64(1)<<(drop-1)
		w >>= drop
		e2 += drop
		if rem > half || rem == half && (sticky || w&1 == 1) {
			w++ // 2^53 at most, still exact
		}
	}
	// w ≤ 2^53 is a float64, and so is 2^e2 (|e2| < 160 here): the
	// product is exact. (math.Ldexp would do, at twice the cost.)
	f := float64(w) * math.Float64frombits(uint64(1023+e2)<<52)
	if neg {
		f = -f
	}
	return f, true
}
