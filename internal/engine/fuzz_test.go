package engine_test

import (
	"context"
	"errors"
	"math"
	"testing"

	"google.golang.org/protobuf/reflect/protoreflect"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/engine"
	"github.com/kinchain/kinchain/internal/validate"
)

// fuzzBytes reads fuzz input a byte at a time; past the end it reads zeros.
type fuzzBytes struct{ b []byte }

func (f *fuzzBytes) next() byte {
	if len(f.b) == 0 {
		return 0
	}
	c := f.b[0]
	f.b = f.b[1:]
	return c
}

// signed maps a byte to [-1, 1).
func (f *fuzzBytes) signed() float64 { return float64(int8(f.next())) / 128 }

// fuzzRequest builds a small request from fuzz bytes: 1–3 tracks of any
// segments (duplicates too), 16–215 samples at 50–1000 Hz with jittered
// times, orientations from a random walk of rotations (always finite and
// unit; the bytes choose the angular steps, so swings of any speed
// appear), raw gyroscope/accelerometer arrays for some tracks, and options
// from the bytes. Every value is finite and the shapes are consistent, so
// the analysis itself, not the decoder, is what is exercised; validation
// may still refuse (duplicate segments, times out of order, …).
func fuzzRequest(b []byte) *kinchainv1.AnalyzeCaptureRequest {
	f := &fuzzBytes{b: b}
	rates := []float64{50, 100, 200, 1000}
	nTracks := 1 + int(f.next())%3
	rate := rates[int(f.next())%len(rates)]
	n := 16 + int(f.next())%200
	c := &kinchainv1.Capture{CaptureId: "fuzz"}
	for i := 0; i < nTracks; i++ {
		t := &kinchainv1.Track{Segment: kinchainv1.Segment(1 + int(f.next())%10)}
		kind := f.next() % 3                 // 0: orientation, 1: raw inertial, 2: both
		step := 0.5 + 5*math.Abs(f.signed()) // rad/s scale of the walk
		q := [4]float64{1, 0, 0, 0}
		for k := 0; k < n; k++ {
			t.TimeS = append(t.TimeS, (float64(k)+0.3*f.signed())/rate)
			w := [3]float64{step * f.signed(), step * f.signed(), step * f.signed()} // rad/s
			q = rotate(q, w, 1/rate)
			if kind != 1 {
				t.Qw, t.Qx, t.Qy, t.Qz = append(t.Qw, q[0]), append(t.Qx, q[1]), append(t.Qy, q[2]), append(t.Qz, q[3])
			}
			if kind != 0 {
				t.Gx, t.Gy, t.Gz = append(t.Gx, w[0]), append(t.Gy, w[1]), append(t.Gz, w[2])
				t.Ax, t.Ay, t.Az = append(t.Ax, 2*f.signed()), append(t.Ay, 2*f.signed()), append(t.Az, 9.81+2*f.signed())
			}
		}
		c.Tracks = append(c.Tracks, t)
	}
	opts := &kinchainv1.AnalysisOptions{}
	if v := f.next(); v%4 == 1 {
		cut := 1 + float64(v%60) // Hz, may exceed Nyquist: an error to report
		opts.CutoffHz = &cut
	}
	if v := f.next(); v%3 == 1 {
		opts.FilterOrder = int32(v % 9)
	}
	opts.Speed = kinchainv1.SpeedDefinition(f.next() % 4)
	opts.IncludeSeries = f.next()%2 == 1
	return &kinchainv1.AnalyzeCaptureRequest{Capture: c, Options: opts}
}

// rotate turns unit quaternion q by angular velocity w (rad/s, world frame)
// for dt seconds: q ← exp(w dt / 2) ⊗ q, renormalised.
func rotate(q [4]float64, w [3]float64, dt float64) [4]float64 {
	a := math.Sqrt(w[0]*w[0]+w[1]*w[1]+w[2]*w[2]) * dt
	if a == 0 {
		return q
	}
	s := math.Sin(a/2) / (a / dt)
	d := [4]float64{math.Cos(a / 2), w[0] * s, w[1] * s, w[2] * s}
	r := [4]float64{
		d[0]*q[0] - d[1]*q[1] - d[2]*q[2] - d[3]*q[3],
		d[0]*q[1] + d[1]*q[0] + d[2]*q[3] - d[3]*q[2],
		d[0]*q[2] - d[1]*q[3] + d[2]*q[0] + d[3]*q[1],
		d[0]*q[3] + d[1]*q[2] - d[2]*q[1] + d[3]*q[0],
	}
	nr := math.Sqrt(r[0]*r[0] + r[1]*r[1] + r[2]*r[2] + r[3]*r[3])
	return [4]float64{r[0] / nr, r[1] / nr, r[2] / nr, r[3] / nr}
}

// nonFinite returns the first NaN or ±Inf double in m, by field name.
func nonFinite(m protoreflect.Message) (string, bool) {
	var bad string
	m.Range(func(fd protoreflect.FieldDescriptor, v protoreflect.Value) bool {
		check := func(x protoreflect.Value) bool {
			switch fd.Kind() {
			case protoreflect.DoubleKind, protoreflect.FloatKind:
				if f := x.Float(); math.IsNaN(f) || math.IsInf(f, 0) {
					bad = string(fd.FullName())
					return false
				}
			case protoreflect.MessageKind:
				if n, ok := nonFinite(x.Message()); ok {
					bad = n
					return false
				}
			}
			return true
		}
		switch {
		case fd.IsList():
			l := v.List()
			for i := 0; i < l.Len(); i++ {
				if !check(l.Get(i)) {
					return false
				}
			}
		case fd.IsMap():
		default:
			return check(v)
		}
		return true
	})
	return bad, bad != ""
}

// FuzzAnalyze: the whole analysis on arbitrary finite captures (see
// fuzzRequest) never panics and ends in a response whose every number is
// finite, or in an error: a *validate.Error with a reason from the fixed
// set and a detail, or another error with a message (an analysis that
// cannot be done, e.g. no swing-capable segment). Small captures keep each
// run short.
func FuzzAnalyze(f *testing.F) {
	f.Add([]byte{})
	f.Add([]byte{0, 1, 100, 0, 0, 10})
	f.Add([]byte{2, 3, 199, 0, 0, 60, 9, 2, 200, 4, 1, 100})
	f.Add([]byte{1, 2, 150, 9, 1, 127, 9, 0, 127, 1, 37, 1, 5, 2, 1})
	f.Add([]byte{0, 0, 15, 3, 2, 80, 5, 13, 4, 3})
	eng := engine.New(engine.Config{})
	f.Fuzz(func(t *testing.T, b []byte) {
		req := fuzzRequest(b)
		resp, err := eng.Analyze(context.Background(), req)
		if err != nil {
			var ve *validate.Error
			if errors.As(err, &ve) {
				if ve.Detail == "" || ve.Reason == "" || ve.Reason == validate.ReasonOther {
					t.Fatalf("validation error without reason or detail: %#v", ve)
				}
				return
			}
			if err.Error() == "" {
				t.Fatalf("an error without a message (%T)", err)
			}
			return
		}
		if resp == nil {
			t.Fatal("nil response without an error")
		}
		if name, bad := nonFinite(resp.ProtoReflect()); bad {
			t.Fatalf("response field %s is not finite", name)
		}
	})
}
