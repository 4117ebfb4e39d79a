package decode_test

import (
	"bytes"
	"errors"
	"math"
	"os"
	"path/filepath"
	"testing"

	"google.golang.org/protobuf/proto"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/capture"
	"github.com/kinchain/kinchain/internal/decode"
	"github.com/kinchain/kinchain/internal/encode"
	"github.com/kinchain/kinchain/internal/validate"
)

// seed adds every corpus file with one of the extensions to f.
func seed(f *testing.F, exts ...string) {
	for _, dir := range []string{badDir, goodDir} {
		for _, ext := range exts {
			names, err := filepath.Glob(filepath.Join(dir, "*"+ext))
			if err != nil {
				f.Fatal(err)
			}
			for _, n := range names {
				b, err := os.ReadFile(n)
				if err != nil {
					f.Fatal(err)
				}
				f.Add(b)
			}
		}
	}
}

// fuzzLimits keep fuzzing fast: small captures only.
var fuzzLimits = validate.Limits{MaxSamples: 5000, MaxBytes: 1 << 20, MinSamples: 2}

// mustBeValidationError fails unless err is nil or a *validate.Error with a
// reason from the fixed set and a detail.
func mustBeValidationError(t *testing.T, err error) {
	t.Helper()
	if err == nil {
		return
	}
	var e *validate.Error
	if !errors.As(err, &e) {
		t.Fatalf("error %T %q is not a *validate.Error", err, err)
	}
	known := false
	for _, r := range validate.AllReasons() {
		known = known || r == e.Reason
	}
	if !known || e.Reason == validate.ReasonOther || e.Detail == "" {
		t.Fatalf("reason %q detail %q", e.Reason, e.Detail)
	}
}

// checkValid checks what validate promises of a capture it accepts.
func checkValid(t *testing.T, c *capture.Capture) {
	t.Helper()
	for _, tr := range c.Tracks {
		for k := 1; k < len(tr.Time); k++ {
			if !(tr.Time[k] > tr.Time[k-1]) {
				t.Fatalf("%v: time not increasing at %d", tr.Segment, k)
			}
		}
		for k, q := range tr.Q {
			if n := math.Sqrt(q.Real*q.Real + q.Imag*q.Imag + q.Jmag*q.Jmag + q.Kmag*q.Kmag); math.Abs(n-1) > 1e-12 {
				t.Fatalf("%v: Q[%d] norm %v", tr.Segment, k, n)
			}
		}
		if tr.Q == nil && (tr.Gyro == nil || tr.Accel == nil) {
			t.Fatalf("%v: no orientation", tr.Segment)
		}
	}
}

// FuzzCSV: decode.CSV and validate.Capture never panic and fail only with
// *validate.Error; whatever decodes writes back out (WriteCaptureCSV) and
// decodes to the same capture.
func FuzzCSV(f *testing.F) {
	seed(f, ".csv")
	f.Fuzz(func(t *testing.T, b []byte) {
		pc, loc, err := decode.CSV(bytes.NewReader(b), fuzzLimits)
		mustBeValidationError(t, err)
		if err != nil {
			return
		}
		c, err := validate.Capture(pc, fuzzLimits, loc)
		mustBeValidationError(t, err)
		if err == nil {
			checkValid(t, c)
		}
		var out bytes.Buffer
		if err := encode.WriteCaptureCSV(&out, pc); err != nil {
			t.Fatalf("a decoded capture does not write: %v", err)
		}
		again, _, err := decode.CSV(&out, validate.Limits{})
		if err != nil {
			t.Fatalf("written capture does not decode: %v\n%s", err, out.String())
		}
		if !proto.Equal(pc, again) {
			t.Fatalf("round trip differs:\n%s", diff(pc, again))
		}
	})
}

// FuzzProto: decode.Proto and validate.Capture never panic and fail only
// with *validate.Error; what decodes equals proto.Unmarshal's message (the
// reference, google.golang.org/protobuf), also when decoded into recycled
// slices, and re-encodes and decodes again.
func FuzzProto(f *testing.F) {
	seed(f, ".pb")
	f.Fuzz(func(t *testing.T, b []byte) {
		pc, err := decode.Proto(b)
		mustBeValidationError(t, err)
		if err != nil {
			return
		}
		ref := &kinchainv1.Capture{}
		if err := proto.Unmarshal(b, ref); err != nil {
			t.Fatalf("decoded, but proto.Unmarshal fails: %v", err)
		}
		if !proto.Equal(pc, ref) {
			t.Fatalf("differs from proto.Unmarshal:\n%s", diff(ref, pc))
		}
		if len(b) > 0 {
			pooled, _, err := decode.FileWith("x.pb", b, validate.Limits{}, &poisoned{})
			if err != nil || !proto.Equal(pooled, ref) {
				t.Fatalf("decoded into recycled slices: %v\n%s", err, diff(ref, pooled))
			}
		}
		c, err := validate.Capture(pc, fuzzLimits, nil)
		mustBeValidationError(t, err)
		if err == nil {
			checkValid(t, c)
		}
		wire, err := proto.Marshal(pc)
		if err != nil {
			t.Fatalf("decoded capture does not marshal: %v", err)
		}
		if _, err := decode.Proto(wire); err != nil {
			t.Fatalf("re-encoded capture does not decode: %v", err)
		}
	})
}

// FuzzJSON: decode.JSON, decode.JSONRequest and validation never panic and
// fail only with *validate.Error.
func FuzzJSON(f *testing.F) {
	seed(f, ".json")
	f.Fuzz(func(t *testing.T, b []byte) {
		pc, err := decode.JSON(b)
		mustBeValidationError(t, err)
		if err == nil {
			c, err := validate.Capture(pc, fuzzLimits, nil)
			mustBeValidationError(t, err)
			if err == nil {
				checkValid(t, c)
			}
		}
		r, err := decode.JSONRequest(b)
		mustBeValidationError(t, err)
		if err == nil {
			_, err = validate.Request(r, fuzzLimits, nil)
			mustBeValidationError(t, err)
		}
	})
}
