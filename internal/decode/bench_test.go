package decode_test

import (
	"bytes"
	"math"
	"testing"

	"google.golang.org/protobuf/encoding/protojson"
	"google.golang.org/protobuf/proto"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/decode"
	"github.com/kinchain/kinchain/internal/encode"
	"github.com/kinchain/kinchain/internal/validate"
)

// spinCapture is a capture of n segments (pelvis first) sampled at rate Hz
// for dur s, each sensor turning about world z at its own constant rate,
// with quaternion, gyroscope and accelerometer columns.
func spinCapture(n int, rate, dur float64) *kinchainv1.Capture {
	c := &kinchainv1.Capture{CaptureId: "bench", Handedness: kinchainv1.Handedness_HANDEDNESS_RIGHT}
	m := int(math.Round(rate * dur))
	for s := 1; s <= n; s++ {
		t := &kinchainv1.Track{Segment: kinchainv1.Segment(s)}
		w := float64(s) // rad/s
		for k := 0; k < m; k++ {
			tk := float64(k) / rate
			th := w * tk
			t.TimeS = append(t.TimeS, tk)
			t.Qw = append(t.Qw, math.Cos(th/2))
			t.Qx = append(t.Qx, 0)
			t.Qy = append(t.Qy, 0)
			t.Qz = append(t.Qz, math.Sin(th/2))
			t.Gx = append(t.Gx, 0)
			t.Gy = append(t.Gy, 0)
			t.Gz = append(t.Gz, w)
			t.Ax = append(t.Ax, 0.01*math.Sin(th))
			t.Ay = append(t.Ay, 0.01*math.Cos(th))
			t.Az = append(t.Az, 9.80665)
		}
		c.Tracks = append(c.Tracks, t)
	}
	return c
}

// benchCapture is the benchmark input: 3 s × 6 segments × 1000 Hz.
func benchCapture(b *testing.B) (*kinchainv1.Capture, int) {
	c := spinCapture(6, 1000, 3)
	return c, 6 * 3000
}

func reportSamples(b *testing.B, n int) {
	b.ReportMetric(float64(n)*float64(b.N)/b.Elapsed().Seconds(), "samples/s")
}

func BenchmarkCSV(b *testing.B) {
	c, n := benchCapture(b)
	var buf bytes.Buffer
	if err := encode.WriteCaptureCSV(&buf, c); err != nil {
		b.Fatal(err)
	}
	data := buf.Bytes()
	b.SetBytes(int64(len(data)))
	b.ReportAllocs()
	b.ResetTimer()
	for b.Loop() {
		if _, _, err := decode.CSV(bytes.NewReader(data), validate.Limits{}); err != nil {
			b.Fatal(err)
		}
	}
	reportSamples(b, n)
}

func BenchmarkProto(b *testing.B) {
	c, n := benchCapture(b)
	data, err := proto.Marshal(c)
	if err != nil {
		b.Fatal(err)
	}
	b.SetBytes(int64(len(data)))
	b.ReportAllocs()
	b.ResetTimer()
	for b.Loop() {
		if _, err := decode.Proto(data); err != nil {
			b.Fatal(err)
		}
	}
	reportSamples(b, n)
}

func BenchmarkJSON(b *testing.B) {
	c, n := benchCapture(b)
	data, err := protojson.Marshal(c)
	if err != nil {
		b.Fatal(err)
	}
	b.SetBytes(int64(len(data)))
	b.ReportAllocs()
	b.ResetTimer()
	for b.Loop() {
		if _, err := decode.JSON(data); err != nil {
			b.Fatal(err)
		}
	}
	reportSamples(b, n)
}

// BenchmarkValidate measures validate.Capture on the decoded benchmark
// input, for comparison with the decoders.
func BenchmarkValidate(b *testing.B) {
	c, n := benchCapture(b)
	b.ReportAllocs()
	b.ResetTimer()
	for b.Loop() {
		if _, err := validate.Capture(c, validate.Limits{}, nil); err != nil {
			b.Fatal(err)
		}
	}
	reportSamples(b, n)
}
