package fusion

import (
	"fmt"
	"math"
	"slices"
	"strings"

	"gonum.org/v1/gonum/num/quat"
	"gonum.org/v1/gonum/spatial/r3"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/capture"
	"github.com/kinchain/kinchain/internal/rot"
)

// Options configures Track. The zero value uses the documented defaults.
type Options struct {
	// Params are the VQF parameters; zero fields take the published
	// defaults.
	Params Params
	// IgnoreMag fuses without the magnetometer (6D) even when the track
	// has one: heading then drifts freely.
	IgnoreMag bool
	// GyroRange is the gyroscope's full-scale range, rad/s (per axis).
	// Default DefaultGyroRange, 2000 °/s.
	GyroRange float64
	// AccelRange is the accelerometer's full-scale range, m/s² (per axis).
	// Default DefaultAccelRange, 16 g.
	AccelRange float64
	// AtRangeFraction: a reading whose magnitude on an axis is at least
	// this fraction of the range is flagged (rule AtRange). Default 0.99,
	// which catches sensors whose largest code is a little below the
	// nominal range (e.g. 32767 LSB / 16.4 LSB per °/s = 1998 °/s).
	AtRangeFraction float64
	// PlateauSamples is the shortest run of equal extreme readings that is
	// flagged as a plateau (rule Plateau). Default 3.
	PlateauSamples int
	// NoPrime turns off priming: by default, when a track begins with the
	// sensor still, the filter is first fed TauAcc + RestMinT seconds of
	// that still stretch's mean readings (Filter.Prime), so that a swing
	// soon after the start of the recording does not fall into the
	// filter's start-up averaging.
	NoPrime bool
	// PlateauMinFraction: only extremes at least this fraction of the
	// range are examined for plateaus, so that a still sensor's repeated
	// readings are not taken for clipping. Default 0.25.
	PlateauMinFraction float64
}

func (o Options) withDefaults() Options {
	if o.GyroRange <= 0 {
		o.GyroRange = DefaultGyroRange
	}
	if o.AccelRange <= 0 {
		o.AccelRange = DefaultAccelRange
	}
	if o.AtRangeFraction <= 0 {
		o.AtRangeFraction = defaultAtRange
	}
	if o.PlateauSamples <= 0 {
		o.PlateauSamples = defaultPlateauN
	}
	if o.PlateauMinFraction <= 0 {
		o.PlateauMinFraction = defaultPlateauMin
	}
	return o
}

// Report describes one fused track.
type Report struct {
	// Samples is the number of samples fused.
	Samples int
	// Mag reports that the magnetometer was used (9D).
	Mag bool
	// Dt is the nominal sample interval (the median interval), s.
	Dt float64
	// MaxDt is the longest sample interval, s.
	MaxDt float64
	// Bias is the final gyroscope bias estimate, sensor frame, rad/s, and
	// BiasSigma an upper bound of its standard deviation, rad/s.
	Bias      r3.Vec
	BiasSigma float64
	// RestSamples counts samples at which the sensor was detected at rest.
	RestSamples int
	// MagDisturbedSamples counts samples at which the magnetic field
	// counted as disturbed (9D only).
	MagDisturbedSamples int
	// PrimedSpan is the length of the still stretch at the start of the
	// track whose mean readings primed the filter, s; 0 when the track did
	// not begin still (or priming was off).
	PrimedSpan float64
	// Saturations lists the runs where the gyroscope or the accelerometer
	// was at or past its range, in time order. The fused orientation is
	// less accurate there and after (a saturated gyroscope understates the
	// rotation).
	Saturations []Saturation
}

// GyroSaturated reports whether any gyroscope saturation was found.
func (r *Report) GyroSaturated() bool { return r.has(Gyroscope) }

// AccelClipped reports whether any accelerometer clipping was found.
func (r *Report) AccelClipped() bool { return r.has(Accelerometer) }

func (r *Report) has(s Sensor) bool {
	for _, x := range r.Saturations {
		if x.Sensor == s {
			return true
		}
	}
	return false
}

// maxWarnings bounds the warnings per sensor; the last one then summarises.
const maxWarnings = 10

// Warnings returns the findings as quality warnings for segment seg:
// WARNING_CODE_GYRO_SATURATION and WARNING_CODE_ACCEL_CLIPPING, each with
// the run's start time; at most maxWarnings per sensor, the last of them
// counting the rest.
func (r *Report) Warnings(seg kinchainv1.Segment) []*kinchainv1.Warning {
	var out []*kinchainv1.Warning
	for _, s := range [2]Sensor{Gyroscope, Accelerometer} {
		code := kinchainv1.WarningCode_WARNING_CODE_GYRO_SATURATION
		if s == Accelerometer {
			code = kinchainv1.WarningCode_WARNING_CODE_ACCEL_CLIPPING
		}
		var runs []Saturation
		for _, x := range r.Saturations {
			if x.Sensor == s {
				runs = append(runs, x)
			}
		}
		for i, x := range runs {
			if i == maxWarnings-1 && len(runs) > maxWarnings {
				t := x.StartS
				out = append(out, &kinchainv1.Warning{
					Code: code, Segment: seg, TimeS: &t,
					Message: fmt.Sprintf("%d more %s saturation runs from %.3f s on", len(runs)-i, s, x.StartS),
				})
				break
			}
			t := x.StartS
			out = append(out, &kinchainv1.Warning{Code: code, Segment: seg, TimeS: &t, Message: x.message()})
		}
	}
	return out
}

// message describes a run, in reported units.
func (s Saturation) message() string {
	axis := "xyz"[s.Axis : s.Axis+1]
	var peak string
	if s.Sensor == Gyroscope {
		peak = fmt.Sprintf("%.0f deg/s", s.Peak/deg)
	} else {
		peak = fmt.Sprintf("%.1f g", s.Peak/standardGravity)
	}
	var why []string
	if s.Rule&AtRange != 0 {
		why = append(why, "at or past the configured range")
	}
	if s.Rule&Plateau != 0 {
		why = append(why, "flat at its extreme")
	}
	return fmt.Sprintf("%s %s axis %s (peak %s) for %d samples, %.3f–%.3f s: the sensor's range was probably exceeded and the orientation there is less reliable",
		s.Sensor, axis, strings.Join(why, " and "), peak, s.Samples(), s.StartS, s.EndS)
}

// Detect returns the saturation runs of a track's gyroscope and
// accelerometer readings (either may be absent), in time order.
func Detect(t *capture.Track, opt Options) []Saturation {
	o := opt.withDefaults()
	var out []Saturation
	if len(t.Gyro) == len(t.Time) {
		out = append(out, detectSaturation(Gyroscope, t.Time, t.Gyro, o.GyroRange, o.AtRangeFraction, o.PlateauSamples, o.PlateauMinFraction)...)
	}
	if len(t.Accel) == len(t.Time) {
		out = append(out, detectSaturation(Accelerometer, t.Time, t.Accel, o.AccelRange, o.AtRangeFraction, o.PlateauSamples, o.PlateauMinFraction)...)
	}
	slices.SortStableFunc(out, func(a, b Saturation) int {
		switch {
		case a.Start != b.Start:
			return a.Start - b.Start
		case a.Sensor != b.Sensor:
			return int(a.Sensor) - int(b.Sensor)
		}
		return a.Axis - b.Axis
	})
	return out
}

// Track estimates the orientation of a track from its raw readings with
// VQF: it fills t.Q (sensor → world, see the package comment for the world
// frame), sets t.Fused, and reports saturation findings.
//
// It uses t.Gyro and t.Accel (both required) and t.Mag unless
// opt.IgnoreMag. A track that begins still primes the filter with its
// still stretch (see Options.NoPrime and Filter.Prime). Non-uniform
// sampling: the filter's low-pass coefficients
// are those of the median sample interval, and each sample's gyroscope
// reading is integrated over its own interval t[i] − t[i−1] (the first
// sample over the median interval); the output stays one orientation per
// input sample. Orientations are made hemisphere-continuous
// (q[i]·q[i−1] ≥ 0).
//
// Bad input (missing or mismatched arrays, non-finite readings, times not
// increasing, fewer than two samples) gives an error naming the field and
// the sample; t is then left unchanged.
func Track(t *capture.Track, opt Options) (Report, error) {
	o := opt.withDefaults()
	seg := segmentName(t.Segment)
	n := len(t.Time)
	fail := func(format string, a ...any) (Report, error) {
		return Report{}, fmt.Errorf("fusion: %s: %s", seg, fmt.Sprintf(format, a...))
	}
	switch {
	case n < 2:
		return fail("time_s: %d samples; fusion needs at least 2", n)
	case len(t.Gyro) != n:
		if len(t.Gyro) == 0 {
			return fail("gx, gy, gz: required for fusion")
		}
		return fail("gx: %d samples, time_s has %d", len(t.Gyro), n)
	case len(t.Accel) != n:
		if len(t.Accel) == 0 {
			return fail("ax, ay, az: required for fusion")
		}
		return fail("ax: %d samples, time_s has %d", len(t.Accel), n)
	}
	useMag := !o.IgnoreMag && len(t.Mag) > 0
	if useMag && len(t.Mag) != n {
		return fail("mx: %d samples, time_s has %d", len(t.Mag), n)
	}
	dts := make([]float64, n-1)
	for i := 1; i < n; i++ {
		dt := t.Time[i] - t.Time[i-1]
		if !(dt > 0) || math.IsInf(dt, 0) {
			return fail("time_s[%d]: %v is not after the previous sample (%v)", i, t.Time[i], t.Time[i-1])
		}
		dts[i-1] = dt
	}
	if err := checkFinite(t.Gyro, "g"); err != "" {
		return fail("%s", err)
	}
	if err := checkFinite(t.Accel, "a"); err != "" {
		return fail("%s", err)
	}
	if useMag {
		if err := checkFinite(t.Mag, "m"); err != "" {
			return fail("%s", err)
		}
	}
	rep := Report{Samples: n, Mag: useMag, MaxDt: slices.Max(dts)}
	sorted := slices.Clone(dts)
	slices.Sort(sorted)
	rep.Dt = sorted[len(sorted)/2]
	if len(sorted)%2 == 0 {
		rep.Dt = (sorted[len(sorted)/2-1] + sorted[len(sorted)/2]) / 2
	}

	f := New(o.Params, rep.Dt)
	if !o.NoPrime {
		p := f.Params()
		if k, g, a, m := stillPrefix(t, useMag, p); k > 1 && t.Time[k-1]-t.Time[0] >= minPrimeSpan {
			f.Prime(g, a, m, p.TauAcc+p.RestMinT)
			rep.PrimedSpan = t.Time[k-1] - t.Time[0]
		}
	}
	q := make([]quat.Number, n)
	var mag r3.Vec
	for i := 0; i < n; i++ {
		dt := rep.Dt
		if i > 0 {
			dt = dts[i-1]
		}
		if useMag {
			mag = t.Mag[i]
		}
		f.UpdateDt(dt, t.Gyro[i], t.Accel[i], mag)
		qi := f.Quat()
		if i > 0 && rot.Dot(qi, q[i-1]) < 0 {
			qi = rot.Neg(qi)
		}
		q[i] = qi
		if f.Rest() {
			rep.RestSamples++
		}
		if useMag && f.MagDisturbed() {
			rep.MagDisturbedSamples++
		}
	}
	rep.Bias, rep.BiasSigma = f.Bias()
	rep.Saturations = Detect(t, o)
	t.Q = q
	t.Fused = true
	return rep, nil
}

// minPrimeSpan is the shortest still stretch at the start of a track that
// primes the filter, s: long enough to average sensor noise over tens of
// samples at common rates (common practice, no source).
const minPrimeSpan = 0.1

// stillBlock is the span over which readings are averaged before the rest
// test of stillPrefix, s: white sensor noise shrinks by √(samples) in the
// average, so a noisy but still sensor passes while a movement of more than
// a few milliseconds still breaks the prefix (common practice, no source).
const stillBlock = 0.01

// stillPrefix returns the number k of samples at the start of t, spanning
// at most TauAcc seconds, that are still by VQF's rest criteria applied to
// block means: the mean gyroscope and accelerometer reading of each block of
// stillBlock seconds lies within RestThGyr and RestThAcc of the running mean
// of the samples before it, and the running gyroscope mean within BiasClip
// per axis. Testing block means rather than single readings keeps sensor
// noise from ending the prefix (VQF itself low-passes before its rest test).
// It also returns the mean readings of those k samples.
func stillPrefix(t *capture.Track, useMag bool, p Params) (k int, g, a, m r3.Vec) {
	n := len(t.Time)
	block := 1
	if n > 1 {
		dt := (t.Time[n-1] - t.Time[0]) / float64(n-1)
		block = max(1, int(math.Round(stillBlock/dt)))
	}
	var sg, sa, sm r3.Vec
	for k < n && t.Time[k]-t.Time[0] <= p.TauAcc {
		end := min(k+block, n)
		var bg, ba, bm r3.Vec
		for i := k; i < end; i++ {
			bg = r3.Add(bg, t.Gyro[i])
			ba = r3.Add(ba, t.Accel[i])
			if useMag {
				bm = r3.Add(bm, t.Mag[i])
			}
		}
		if k > 0 {
			inv, binv := 1/float64(k), 1/float64(end-k)
			mg, ma := r3.Scale(inv, sg), r3.Scale(inv, sa)
			if r3.Norm(r3.Sub(r3.Scale(binv, bg), mg)) >= p.RestThGyr || r3.Norm(r3.Sub(r3.Scale(binv, ba), ma)) >= p.RestThAcc ||
				math.Abs(mg.X) > p.BiasClip || math.Abs(mg.Y) > p.BiasClip || math.Abs(mg.Z) > p.BiasClip {
				break
			}
		}
		sg, sa, sm = r3.Add(sg, bg), r3.Add(sa, ba), r3.Add(sm, bm)
		k = end
	}
	if k == 0 {
		return 0, g, a, m
	}
	inv := 1 / float64(k)
	return k, r3.Scale(inv, sg), r3.Scale(inv, sa), r3.Scale(inv, sm)
}

// checkFinite returns a message naming the first non-finite component of
// v, whose columns are prefix+"x", "y", "z"; "" when all are finite.
func checkFinite(v []r3.Vec, prefix string) string {
	for i, x := range v {
		for a, c := range [3]float64{x.X, x.Y, x.Z} {
			if math.IsNaN(c) || math.IsInf(c, 0) {
				return fmt.Sprintf("%s%c[%d]: %v is not a finite number", prefix, "xyz"[a], i, c)
			}
		}
	}
	return ""
}

// segmentName returns the lower-case segment name (e.g. "lead_forearm").
func segmentName(s kinchainv1.Segment) string {
	if s == kinchainv1.Segment_SEGMENT_UNSPECIFIED {
		return "track"
	}
	return strings.ToLower(strings.TrimPrefix(s.String(), "SEGMENT_"))
}
