package fusion

import (
	"math"
	"strings"
	"testing"

	"gonum.org/v1/gonum/spatial/r3"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/capture"
)

// pulse returns a Gaussian pulse of height peak centred at t0 (width σ).
func pulse(t, t0, sigma, peak float64) float64 {
	return peak * math.Exp(-0.5*sq((t-t0)/sigma))
}

// clipTo limits x to ±c, as a sensor at full scale does.
func clipTo(x, c float64) float64 { return math.Max(-c, math.Min(c, x)) }

// expectRun returns the first and last index where cond holds (−1 if none).
func expectRun(n int, cond func(i int) bool) (int, int) {
	a, b := -1, -1
	for i := 0; i < n; i++ {
		if cond(i) {
			if a < 0 {
				a = i
			}
			b = i
		}
	}
	return a, b
}

// clippedTrack is 2 s at 1 kHz: a club-like gyroscope pulse of 2600 °/s on
// z and −2300 °/s on x, clipped at ±gyroClip, and a 30 g impact spike on the
// accelerometer's x axis, clipped at ±accClip.
func clippedTrack(gyroClip, accClip float64) (capture.Track, []r3.Vec, []r3.Vec) {
	n := 2000
	tr := capture.Track{Time: make([]float64, n), Gyro: make([]r3.Vec, n), Accel: make([]r3.Vec, n)}
	trueG := make([]r3.Vec, n)
	trueA := make([]r3.Vec, n)
	for i := range tr.Time {
		t := float64(i) / 1000
		tr.Time[i] = t
		trueG[i] = r3.Vec{X: pulse(t, 1.0, 0.04, -2300*deg), Y: pulse(t, 1.0, 0.05, 400*deg), Z: pulse(t, 1.02, 0.03, 2600*deg)}
		trueA[i] = r3.Vec{X: pulse(t, 1.05, 0.002, 30*standardGravity), Z: 9.81}
		tr.Gyro[i] = r3.Vec{X: clipTo(trueG[i].X, gyroClip), Y: clipTo(trueG[i].Y, gyroClip), Z: clipTo(trueG[i].Z, gyroClip)}
		tr.Accel[i] = r3.Vec{X: clipTo(trueA[i].X, accClip), Y: clipTo(trueA[i].Y, accClip), Z: clipTo(trueA[i].Z, accClip)}
	}
	return tr, trueG, trueA
}

// A gyroscope clipped at its configured ±2000 °/s and an accelerometer at
// the largest code of a ±16 g part (32767/2048 g, common practice, no
// source) are found exactly where the truth exceeds 0.99 × the range.
func TestDetectAtRange(t *testing.T) {
	accFull := 32767.0 / 2048 * standardGravity
	tr, trueG, trueA := clippedTrack(2000*deg, accFull)
	got := Detect(&tr, Options{})
	want := []struct {
		s    Sensor
		axis int
		abs  func(i int) float64
		th   float64
	}{
		{Gyroscope, 0, func(i int) float64 { return -trueG[i].X }, 0.99 * 2000 * deg},
		{Gyroscope, 2, func(i int) float64 { return trueG[i].Z }, 0.99 * 2000 * deg},
		{Accelerometer, 0, func(i int) float64 { return trueA[i].X }, 0.99 * 16 * standardGravity},
	}
	if len(got) != len(want) {
		t.Fatalf("got %d runs, want %d: %+v", len(got), len(want), got)
	}
	for _, w := range want {
		a, b := expectRun(len(tr.Time), func(i int) bool { return w.abs(i) >= w.th })
		found := false
		for _, g := range got {
			if g.Sensor != w.s || g.Axis != w.axis {
				continue
			}
			found = true
			if g.Start != a || g.End != b {
				t.Errorf("%v axis %d: run %d–%d, want %d–%d", w.s, w.axis, g.Start, g.End, a, b)
			}
			if g.StartS != tr.Time[a] || g.EndS != tr.Time[b] {
				t.Errorf("%v axis %d: times %g–%g, want %g–%g", w.s, w.axis, g.StartS, g.EndS, tr.Time[a], tr.Time[b])
			}
			if g.Rule != AtRange|Plateau {
				t.Errorf("%v axis %d: rule %b, want at-range and plateau", w.s, w.axis, g.Rule)
			}
		}
		if !found {
			t.Errorf("no run for %v axis %d", w.s, w.axis)
		}
	}
	// Time order.
	for i := 1; i < len(got); i++ {
		if got[i].Start < got[i-1].Start {
			t.Errorf("runs not in time order: %+v", got)
		}
	}
}

// A gyroscope that clips at ±1000 °/s although ±2000 °/s was configured
// shows flat tops at its extremes: found by the plateau rule alone.
func TestDetectPlateauBelowConfiguredRange(t *testing.T) {
	tr, trueG, _ := clippedTrack(1000*deg, 100*standardGravity)
	got := Detect(&tr, Options{})
	var gyro []Saturation
	for _, g := range got {
		if g.Sensor == Gyroscope {
			gyro = append(gyro, g)
		}
	}
	if len(gyro) != 2 {
		t.Fatalf("got %d gyroscope runs, want 2 (x and z): %+v", len(gyro), gyro)
	}
	for _, g := range gyro {
		if g.Rule != Plateau {
			t.Errorf("axis %d: rule %b, want plateau only", g.Axis, g.Rule)
		}
		if math.Abs(g.Peak-1000*deg) > 1e-9 {
			t.Errorf("axis %d: peak %g °/s, want 1000", g.Axis, g.Peak/deg)
		}
		a, b := expectRun(len(tr.Time), func(i int) bool { return math.Abs(component(trueG[i], g.Axis)) >= 1000*deg })
		if g.Start != a || g.End != b {
			t.Errorf("axis %d: run %d–%d, want %d–%d", g.Axis, g.Start, g.End, a, b)
		}
	}
	// The accelerometer spike (30 g) is under the 100 g clip: no plateau,
	// but it is past the default 16 g range.
	var acc int
	for _, g := range got {
		if g.Sensor == Accelerometer {
			acc++
			if g.Rule != AtRange {
				t.Errorf("accelerometer rule %b, want at-range only", g.Rule)
			}
		}
	}
	if acc != 1 {
		t.Errorf("got %d accelerometer runs, want 1", acc)
	}
}

// Readings below the range, and a still sensor repeating the same reading,
// give no findings; a lone sample equal to a large maximum is no plateau.
func TestDetectNoFalsePositives(t *testing.T) {
	n := 3000
	tr := capture.Track{Time: make([]float64, n), Gyro: make([]r3.Vec, n), Accel: make([]r3.Vec, n)}
	for i := range tr.Time {
		t := float64(i) / 1000
		tr.Time[i] = t
		tr.Gyro[i] = r3.Vec{Z: pulse(t, 1.5, 0.03, 1500*deg)}
		tr.Accel[i] = r3.Vec{Z: 9.81} // exactly repeated: a still, noiseless sensor
	}
	if got := Detect(&tr, Options{}); len(got) != 0 {
		t.Fatalf("unexpected findings: %+v", got)
	}
	// Two equal samples at the maximum (less than PlateauSamples).
	tr.Gyro[1500].Z, tr.Gyro[1501].Z = 1600*deg, 1600*deg
	if got := Detect(&tr, Options{}); len(got) != 0 {
		t.Fatalf("two equal samples taken for a plateau: %+v", got)
	}
	tr.Gyro[1502].Z = 1600 * deg
	if got := Detect(&tr, Options{}); len(got) != 1 || got[0].Start != 1500 || got[0].End != 1502 {
		t.Fatalf("three equal samples at the maximum: %+v", got)
	}
}

// Track reports the findings and turns them into quality warnings with
// the run's start time.
func TestTrackReportsSaturation(t *testing.T) {
	tr, _, _ := clippedTrack(2000*deg, 32767.0/2048*standardGravity)
	tr.Segment = kinchainv1.Segment_SEGMENT_CLUB
	rep, err := Track(&tr, Options{})
	if err != nil {
		t.Fatal(err)
	}
	if !rep.GyroSaturated() || !rep.AccelClipped() {
		t.Fatalf("saturation not reported: %+v", rep.Saturations)
	}
	ws := rep.Warnings(kinchainv1.Segment_SEGMENT_CLUB)
	var g, a int
	for _, w := range ws {
		switch w.GetCode() {
		case kinchainv1.WarningCode_WARNING_CODE_GYRO_SATURATION:
			g++
		case kinchainv1.WarningCode_WARNING_CODE_ACCEL_CLIPPING:
			a++
		}
		if w.TimeS == nil || w.GetSegment() != kinchainv1.Segment_SEGMENT_CLUB || w.GetMessage() == "" {
			t.Errorf("incomplete warning %v", w)
		}
	}
	if g != 2 || a != 1 {
		t.Fatalf("got %d gyroscope and %d accelerometer warnings, want 2 and 1: %v", g, a, ws)
	}
	if !strings.Contains(ws[0].GetMessage(), "2000 deg/s") {
		t.Errorf("message lacks the peak: %q", ws[0].GetMessage())
	}
	// A configured range wider than the readings, and a plateau threshold
	// above them, silence the findings.
	rep, err = Track(&tr, Options{GyroRange: 4000 * deg, AccelRange: 200 * standardGravity, PlateauMinFraction: 0.6})
	if err != nil {
		t.Fatal(err)
	}
	if len(rep.Saturations) != 0 {
		t.Fatalf("findings with wide ranges: %+v", rep.Saturations)
	}
}

// Many runs are summarised after maxWarnings warnings.
func TestWarningsBounded(t *testing.T) {
	var rep Report
	for i := 0; i < 25; i++ {
		rep.Saturations = append(rep.Saturations, Saturation{Sensor: Gyroscope, Axis: 2, Start: 10 * i, End: 10*i + 2, StartS: float64(i), EndS: float64(i) + 0.002, Peak: 2000 * deg, Rule: AtRange})
	}
	ws := rep.Warnings(kinchainv1.Segment_SEGMENT_CLUB)
	if len(ws) != maxWarnings {
		t.Fatalf("%d warnings, want %d", len(ws), maxWarnings)
	}
	if last := ws[len(ws)-1].GetMessage(); !strings.Contains(last, "16 more") {
		t.Fatalf("last warning %q does not count the rest", last)
	}
}

// Bad input gives an error naming the field and the sample, and leaves the
// track unchanged.
func TestTrackBadInput(t *testing.T) {
	good := func() capture.Track {
		n := 10
		tr := capture.Track{Segment: kinchainv1.Segment_SEGMENT_LEAD_HAND, Time: make([]float64, n), Gyro: make([]r3.Vec, n), Accel: make([]r3.Vec, n)}
		for i := range tr.Time {
			tr.Time[i] = float64(i) / 100
			tr.Accel[i] = r3.Vec{Z: 9.81}
		}
		return tr
	}
	cases := []struct {
		name, want string
		edit       func(*capture.Track)
	}{
		{"no gyro", "gx, gy, gz: required", func(t *capture.Track) { t.Gyro = nil }},
		{"no accel", "ax, ay, az: required", func(t *capture.Track) { t.Accel = nil }},
		{"short gyro", "gx: 9 samples, time_s has 10", func(t *capture.Track) { t.Gyro = t.Gyro[:9] }},
		{"short mag", "mx: 3 samples", func(t *capture.Track) { t.Mag = make([]r3.Vec, 3) }},
		{"one sample", "time_s: 1 samples", func(t *capture.Track) { t.Time, t.Gyro, t.Accel = t.Time[:1], t.Gyro[:1], t.Accel[:1] }},
		{"time back", "time_s[4]", func(t *capture.Track) { t.Time[4] = t.Time[3] }},
		{"time NaN", "time_s[4]", func(t *capture.Track) { t.Time[4] = math.NaN() }},
		{"gyro NaN", "gy[7]: NaN", func(t *capture.Track) { t.Gyro[7].Y = math.NaN() }},
		{"accel Inf", "az[2]: +Inf", func(t *capture.Track) { t.Accel[2].Z = math.Inf(1) }},
		{"mag NaN", "mx[5]: NaN", func(t *capture.Track) { t.Mag = make([]r3.Vec, 10); t.Mag[5].X = math.NaN() }},
	}
	for _, c := range cases {
		tr := good()
		c.edit(&tr)
		_, err := Track(&tr, Options{})
		if err == nil || !strings.Contains(err.Error(), c.want) || !strings.Contains(err.Error(), "lead_hand") {
			t.Errorf("%s: error %v, want one containing %q and the segment", c.name, err, c.want)
		}
		if tr.Q != nil || tr.Fused {
			t.Errorf("%s: track changed despite the error", c.name)
		}
	}
	// A NaN magnetometer is irrelevant when the magnetometer is ignored.
	tr := good()
	tr.Mag = make([]r3.Vec, 10)
	tr.Mag[5].X = math.NaN()
	if _, err := Track(&tr, Options{IgnoreMag: true}); err != nil {
		t.Errorf("IgnoreMag still checks the magnetometer: %v", err)
	}
}
