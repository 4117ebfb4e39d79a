package server

import (
	"encoding/json"
	"math"
	"math/big"
	"math/rand/v2"
	"strconv"
	"strings"
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
		{"tracks first", `{"options": {"cutoff_hz": 3}, "capture": {"tracks": [{"qw": [1]}], "club": "driver"}}`, true},
		{"spaces in array", "{\"capture\": {\"tracks\": [{\"qw\": [ 1 ,\n2\t,\r3 ] }]}}", true},
		{"exponent forms", `{"capture": {"tracks": [{"qw": [1e2, 1E+2, 1e-2, -0.0e0, 0.1, 123e25, 9007199254740993]}]}}`, true},
		{"nested array", `{"capture": {"tracks": [{"qw": [[1]]}]}}`, false},
		{"array closed twice", `{"capture": {"tracks": [{"qw": [1]]}]}}`, false},
		{"tracks not closed", `{"capture": {"tracks": [{"qw": [1]}}}`, false},
		{"duplicate capture first without tracks", `{"capture": {}, "capture": {"tracks": []}}`, false},
		{"tracks missing", `{"capture": {"club": "driver"}}`, false},
		{"tracks in a track", `{"capture": {"tracks": [{"tracks": [1]}]}}`, false},
		{"duplicate elsewhere", `{"capture": {"club": "a", "club": "b", "tracks": [{"qw": [1]}]}}`, false},
		{"duplicate mounting", `{"capture": {"tracks": [{"mounting": {"w": 1}, "mounting": {"w": 1}, "qw": [1]}]}}`, false},
		{"second value", `{"capture": {"tracks": [{"qw": [1]}]}}{}`, false},
		{"truncated number", `{"capture": {"tracks": [{"qw": [1e`, false},
		{"exponent without digits", `{"capture": {"tracks": [{"qw": [1e+]}]}}`, false},
		{"minus alone", `{"capture": {"tracks": [{"qw": [-]}]}}`, false},
		{"true in array", `{"capture": {"tracks": [{"qw": [true]}]}}`, false},
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

// numberCases are edge cases of decimal to float64 conversion: both sides
// of Clinger's fast path (mantissa 2^53, powers 10^22 and 10^23, the
// exact-integer extension up to 10^37), 17–19 digit mantissas for the
// integer path (exponents to ±27), the ends of float64's range, longer
// mantissas left to ParseFloat, and the sign of zero. The
// reference is strconv.ParseFloat (Go's standard library), bit for bit.
var numberCases = []string{
	"0", "-0", "0.0", "-0.0", "0e0", "-0e5", "0e-400", "-0e400", "0.000",
	"1", "-1", "0.1", "0.2", "0.3", "-0.3", "1.5", "9.81", "0.001", "2.999",
	"1e22", "1e23", "-1e22", "1e-22", "1e-23", "3e-22", "9e22", "1.5e22",
	"123e25", "9e37", "9e38", "1e37", "1e38", "9007199254740991e22", "900719925474099e23",
	"9007199254740991", "9007199254740992", "9007199254740993", "9007199254740994",
	"9007199254740995", "-9007199254740993", "9007199254740993e-5", "9007199254740992e-22",
	"18014398509481985", "4503599627370496.5", "4503599627370497.5",
	"5e-324", "4e-324", "2e-324", "3e-324", "1e-400", "-1e-400", "2.4703282292062327e-324",
	"2.2250738585072014e-308", "2.2250738585072011e-308", "4.9406564584124654e-324",
	"1.7976931348623157e308", "-1.7976931348623157e308", "1.7976931348623158e308",
	"1.7976931348623159e308", "1e308", "1e309", "-1e309", "1e400",
	"0.99980000666657776", "0.019998666693333080", "-0.0019998666693333080",
	"1.0000000000000002", "0.30000000000000004", "123456.78901234567",
	"1234567890123456789", "12345678901234567890", "123456789012345678901234567890",
	"1.00000000000000000000000000001", "0.1000000000000000000000000000",
	"1000000000000000000000", "10000000000000000000000", "100000000000000000000000",
	"0.000000000000000000000000000001", "0.00000000000000000000001",
	"3.14159265358979323846264338327950288419716939937510",
	"1E2", "1E+2", "1e+2", "1e-2", "1e-0", "1e00000000000000000000000002", "100e-2",
	"1e-99999999999", "1e99999999999", "0e99999999999",
	"0.000000000000000000000000000000000000000000000000000000000001e60",
	"7.2057594037927933e16", "7.2057594037927935e16", "1.448997445238699", "8.988465674311579e307",
	"8.98846567431158e307", "4.450147717014403e-308", "1e-7", "-1e-07", "123456789e-31",
}

// TestNumber compares number with strconv.ParseFloat, the reference, bit
// for bit (math.Float64bits tells -0 from 0): on the edge cases, on each
// with a delimiter after it, and on random float64s printed in several
// formats.
func TestNumber(t *testing.T) {
	check := func(s string) {
		t.Helper()
		want, err := strconv.ParseFloat(s, 64)
		for _, suffix := range []string{"", ",", "]", " "} {
			v, end, ok := number([]byte(s+suffix), 0)
			if ok != (err == nil) {
				t.Fatalf("number(%q): ok %v, strconv.ParseFloat error %v", shorten(s+suffix), ok, err)
			}
			if ok && (end != len(s) || math.Float64bits(v) != math.Float64bits(want)) {
				t.Fatalf("number(%q) = %v (%#x), end %d; strconv.ParseFloat %v (%#x), end %d",
					shorten(s+suffix), v, math.Float64bits(v), end, want, math.Float64bits(want), len(s))
			}
		}
	}
	for _, s := range numberCases {
		check(s)
	}
	// Leading zeros of the fraction offsetting a long exponent: 1e4, but
	// 0 from ParseFloat once the exponent is too long for it to gather.
	for _, zeros := range []int{30, 9990, 9999, 49999, 99999, 1e6} {
		check("0." + strings.Repeat("0", zeros) + "1e" + strconv.Itoa(zeros+5))
		check("0." + strings.Repeat("0", zeros) + "1e-" + strconv.Itoa(zeros+5))
	}
	r := rand.New(rand.NewPCG(1, 2))
	n := 20000
	if testing.Short() {
		n = 2000
	}
	// Halfway cases with at most 19 digits, which the rounding of 17–19
	// digit numbers must send to the even neighbour, and their neighbours
	// one unit in the last digit away: t an odd 54-bit integer, t × 2^j
	// is halfway between two float64s, as is t × 2^-j = t × 5^j × 10^-j;
	// the same with a trailing 0 and exponent -1 takes the quotient path.
	for i := 0; i < n/10; i++ {
		t := r.Uint64()>>10 | 1<<53 | 1
		j := r.IntN(10)
		ties := []string{strconv.FormatUint(t<<j, 10), strconv.FormatUint(t<<j, 10) + "0e-1"}
		if j <= 3 {
			ties = append(ties, strconv.FormatUint(t*uint64pow5[j], 10)+"e-"+strconv.Itoa(j))
		}
		for _, tie := range ties {
			m, e, _ := strings.Cut(tie, "e")
			u, _ := strconv.ParseUint(m, 10, 64)
			for _, mm := range []uint64{u - 1, u, u + 1} {
				s := strconv.FormatUint(mm, 10)
				if e != "" {
					s += "e" + e
				}
				check(s)
				check("-" + s)
			}
		}
	}
	// Products mant × 10^k a little above or below halfway, the excess
	// too small to show in their top 64 bits (the rounding must look at
	// the bits below): mant = ⌈t × 2^sh / 5^k⌉ for odd 54-bit t, with sh
	// making mant about 2^62.
	for i := 0; i < n/10; i++ {
		k := 5 + r.IntN(20)
		p5 := new(big.Int).SetUint64(uint64pow5[k])
		half := new(big.Int).Lsh(new(big.Int).SetUint64(r.Uint64()>>10|1<<53|1), uint(62+p5.BitLen()-54))
		m := new(big.Int).Add(half, new(big.Int).Sub(p5, big.NewInt(1)))
		m.Quo(m, p5)
		for _, mm := range []uint64{m.Uint64() - 1, m.Uint64()} {
			check(strconv.FormatUint(mm, 10) + "e" + strconv.Itoa(k))
		}
	}
	for i := 0; i < n; i++ {
		f := math.Float64frombits(r.Uint64())
		if math.IsNaN(f) || math.IsInf(f, 0) {
			continue
		}
		if i%2 == 0 { // values near the benchmark's: modest magnitudes
			f = math.Ldexp(math.Abs(f)/math.MaxFloat64, r.IntN(80)-60) * float64(1-2*r.IntN(2))
		}
		check(strconv.FormatFloat(f, 'g', -1, 64))
		check(strconv.FormatFloat(f, 'e', r.IntN(25), 64))
		check(strconv.FormatFloat(f, 'f', r.IntN(25), 64))
	}
}

// shorten keeps failure messages about long numbers readable.
func shorten(s string) string {
	if len(s) > 80 {
		return s[:40] + "…" + s[len(s)-40:]
	}
	return s
}

// TestNumberGrammar checks number's acceptance against RFC 8259's grammar,
// here encoding/json.Valid (Go's standard library): what number reads as
// a whole must be a JSON number, and it must stop at whatever else.
func TestNumberGrammar(t *testing.T) {
	for _, s := range []string{"01", "+1", ".5", "1.", "1.e5", "1e", "1e+", "-", "--1", "0x10", "Inf", "NaN", "1_0", "1.5f", "", " 1", "1.2.3", "-.5"} {
		if _, end, ok := number([]byte(s), 0); ok && end == len(s) {
			t.Errorf("number(%q) read it all; json.Valid = %v", s, json.Valid([]byte(s)))
		}
	}
}

// FuzzNumber compares number with strconv.ParseFloat bit for bit (the
// sign of zero included), and its grammar with encoding/json.Valid (both
// Go's standard library, the references).
func FuzzNumber(f *testing.F) {
	for _, s := range numberCases {
		f.Add([]byte(s))
	}
	f.Add([]byte("01"))
	f.Add([]byte("1.e5"))
	f.Add([]byte("-0.0e-0,"))
	f.Fuzz(func(t *testing.T, in []byte) {
		v, end, ok := number(in, 0)
		if ok {
			tok := in[:end]
			if !json.Valid(tok) || end == 0 || !(tok[0] == '-' || '0' <= tok[0] && tok[0] <= '9') {
				t.Fatalf("number read %q from %q, not a JSON number", tok, in)
			}
			want, err := strconv.ParseFloat(string(tok), 64)
			if err != nil || math.Float64bits(v) != math.Float64bits(want) {
				t.Fatalf("number(%q) = %v (%#x); strconv.ParseFloat %v (%#x), %v", tok, v, math.Float64bits(v), want, math.Float64bits(want), err)
			}
		}
		// A whole input that is one JSON number must be read whole, and
		// refused exactly when ParseFloat refuses it (out of range).
		isNum := len(in) > 0 && (in[0] == '-' || '0' <= in[0] && in[0] <= '9') &&
			json.Valid(in) && skipSpace(in, len(in)-1) == len(in)-1
		if isNum {
			_, err := strconv.ParseFloat(string(in), 64)
			if ok != (err == nil) || ok && end != len(in) {
				t.Fatalf("number(%q): ok %v, end %d; strconv.ParseFloat error %v", in, ok, end, err)
			}
		} else if ok && end == len(in) {
			t.Fatalf("number read all of %q, which json.Valid refuses", in)
		}
	})
}

// BenchmarkDecodeRequestJSON compares the fast path with protojson on a
// request of two tracks of ~20,000 samples with ordinary values (fast,
// protojson), and on a capture like the service benchmark's (3 s, six
// segments at 1000 Hz: time stamps i/1000 and quaternions of 16–17
// significant digits, most too long for Clinger's fast path).
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
	benchDecode(b, "", in)
	in, _ = protojson.Marshal(captureRequest())
	benchDecode(b, "capture-", in)
}

// captureRequest is six tracks of 3000 samples: time stamps i/1000 and
// unit quaternions from cosines and sines of arbitrary angles.
func captureRequest() *kinchainv1.AnalyzeCaptureRequest {
	c := &kinchainv1.Capture{CaptureId: "bench", Club: "driver"}
	for s := 1; s <= 6; s++ {
		t := &kinchainv1.Track{Segment: kinchainv1.Segment(s)}
		for i := 0; i < 3000; i++ {
			ts := float64(i) / 1000
			a, e := 1.3*math.Sin(7.1*ts+float64(s)), 0.4*ts+0.3*float64(s)
			t.TimeS = append(t.TimeS, ts)
			t.Qw, t.Qx = append(t.Qw, math.Cos(a)*math.Cos(e)), append(t.Qx, math.Sin(a)*math.Cos(e))
			t.Qy, t.Qz = append(t.Qy, math.Cos(a)*math.Sin(e)), append(t.Qz, math.Sin(a)*math.Sin(e))
		}
		c.Tracks = append(c.Tracks, t)
	}
	return &kinchainv1.AnalyzeCaptureRequest{Capture: c}
}

func benchDecode(b *testing.B, prefix string, in []byte) {
	b.Run(prefix+"fast", func(b *testing.B) {
		b.SetBytes(int64(len(in)))
		for b.Loop() {
			if err := decodeRequestJSON(in, unmarshalOpts, &kinchainv1.AnalyzeCaptureRequest{}); err != nil {
				b.Fatal(err)
			}
		}
	})
	b.Run(prefix+"protojson", func(b *testing.B) {
		b.SetBytes(int64(len(in)))
		for b.Loop() {
			if _, err := refDecode(in); err != nil {
				b.Fatal(err)
			}
		}
	})
}
