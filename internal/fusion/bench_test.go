package fusion

import (
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/spatial/r3"

	"github.com/kinchain/kinchain/internal/capture"
)

// benchReadings returns n plausible 9D samples at 1 kHz: a tumbling sensor
// in a constant field, with noise, so that every branch of the filter runs.
func benchReadings(n int) (gyr, acc, mag []r3.Vec) {
	r := rand.New(rand.NewPCG(11, 12))
	gyr = make([]r3.Vec, n)
	acc = make([]r3.Vec, n)
	mag = make([]r3.Vec, n)
	for i := range gyr {
		t := float64(i) / 1000
		gyr[i] = r3.Vec{X: 2 * math.Sin(3*t), Y: 1.5 * math.Cos(2*t), Z: math.Sin(5 * t)}
		acc[i] = r3.Vec{X: 9.81 * math.Sin(t) * 0.3, Y: 0.2 * r.NormFloat64(), Z: 9.81 * math.Cos(t)}
		mag[i] = r3.Vec{X: 20 + r.NormFloat64(), Y: 5 * math.Sin(t), Z: -40 + r.NormFloat64()}
	}
	return gyr, acc, mag
}

// BenchmarkUpdate9D measures one 9D Update (gyroscope, accelerometer and
// magnetometer, all features on); target ≤ 1 µs and 0 allocations per
// sample on one core.
func BenchmarkUpdate9D(b *testing.B) {
	gyr, acc, mag := benchReadings(4096)
	f := New(Params{}, 0.001)
	b.ReportAllocs()
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		k := i & 4095
		f.Update(gyr[k], acc[k], mag[k])
		_ = f.Quat()
	}
}

// BenchmarkUpdate6D is BenchmarkUpdate9D without the magnetometer.
func BenchmarkUpdate6D(b *testing.B) {
	gyr, acc, _ := benchReadings(4096)
	f := New(Params{}, 0.001)
	b.ReportAllocs()
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		k := i & 4095
		f.Update(gyr[k], acc[k], r3.Vec{})
		_ = f.Quat()
	}
}

// BenchmarkTrack measures Track on a 10 s, 1 kHz 9D track (fusion plus
// saturation detection); ns/op divided by 10,000 is the cost per sample.
func BenchmarkTrack(b *testing.B) {
	const n = 10000
	gyr, acc, mag := benchReadings(n)
	times := make([]float64, n)
	for i := range times {
		times[i] = float64(i) / 1000
	}
	b.ReportAllocs()
	for i := 0; i < b.N; i++ {
		tr := capture.Track{Time: times, Gyro: gyr, Accel: acc, Mag: mag}
		if _, err := Track(&tr, Options{}); err != nil {
			b.Fatal(err)
		}
	}
}
