package condition

import (
	"math"

	"gonum.org/v1/gonum/spatial/r3"
	"gonum.org/v1/gonum/stat"
)

// Thresholds of the data-quality checks. Each names its source or is marked
// as a choice; DEVELOPERS.md gives the reasoning.
const (
	// GapIntervals and GapFloor define the default bridging bound of a track:
	// a sample interval longer than max(GapIntervals × median interval,
	// GapFloor) is a gap, which resampling does not bridge (see GapBound).
	GapIntervals = 3
	// GapFloor is the shortest interval that can be a gap, s.
	GapFloor = 0.010

	// JitterLimit is the timing-jitter warning threshold: the standard
	// deviation of a track's sample intervals as a fraction of their median
	// (the definition of WARNING_CODE_TIMING_JITTER).
	JitterLimit = 0.10

	// LowRateFraction: a track whose effective rate is below this fraction
	// of the grid rate gets WARNING_CODE_LOW_RATE (a choice: below half the
	// grid rate, at least every other grid sample is interpolated).
	LowRateFraction = 0.5

	// PlateauSamples is the number of consecutive samples at a component's
	// extreme that makes a plateau (see plateau).
	PlateauSamples = 5
	// PlateauTolerance is the relative tolerance within which plateau
	// samples equal the extreme: clipped readings are identical, while a
	// smooth peak sampled at 1 kHz stays within 1e-6 of its top for at most
	// one or two samples.
	PlateauTolerance = 1e-6
	// GyroPlateauFloor, rad/s: plateaus below 250 °/s, the smallest common
	// full-scale range of MEMS gyroscopes (common practice, no source), are
	// not saturation (a still sensor's quantised output repeats).
	GyroPlateauFloor = 250 * math.Pi / 180
	// AccelPlateauFloor, m/s²: 2 g, the smallest common accelerometer range
	// (common practice, no source); a still sensor reads 1 g.
	AccelPlateauFloor = 2 * StandardGravity
	// StandardGravity is g₀ = 9.80665 m/s² (CGPM 1901, ISO 80000-3).
	StandardGravity = 9.80665
)

// GapBound returns the default bridging bound, s, of a track whose median
// sample interval is dt s: max(GapIntervals·dt, GapFloor).
func GapBound(dt float64) float64 {
	return math.Max(GapIntervals*dt, GapFloor)
}

// timing holds the interval statistics of one track.
type timing struct {
	median  float64 // median interval, s
	jitter  float64 // standard deviation of the intervals that are not gaps, s
	longest float64 // longest interval, s
	bound   float64 // bridging bound, s
	gaps    []int   // k such that t[k+1] − t[k] > bound
}

// trackTiming computes the interval statistics of sample times t (at least
// two, strictly increasing). maxGap > 0 overrides the bridging bound. iv and
// sel are scratch buffers of at least len(t) − 1 values.
func trackTiming(t []float64, maxGap float64, iv, sel []float64) timing {
	n := len(t) - 1
	iv, sel = iv[:n], sel[:n]
	var tm timing
	for k := 0; k < n; k++ {
		d := t[k+1] - t[k]
		iv[k] = d
		if d > tm.longest {
			tm.longest = d
		}
	}
	copy(sel, iv)
	tm.median = median(sel)
	tm.bound = maxGap
	if tm.bound == 0 {
		tm.bound = GapBound(tm.median)
	}
	m := 0
	for k, d := range iv {
		if d > tm.bound {
			tm.gaps = append(tm.gaps, k)
			continue
		}
		sel[m] = d
		m++
	}
	if m >= 2 {
		tm.jitter = stat.StdDev(sel[:m], nil)
	}
	return tm
}

// plateau reports whether some component of v (its absolute value) stays
// at that component's largest absolute value over the series, within
// PlateauTolerance relative, for PlateauSamples or more consecutive samples,
// with the largest value at least floor. It returns the first sample of the
// first such run.
//
// This is our rule for "the sensor's range was probably exceeded": a
// saturated MEMS sensor outputs its full-scale code, the same value sample
// after sample, and that value is the largest of the recording. No
// absolute threshold is used, since ranges differ between sensors.
func plateau(v []r3.Vec, floor float64) (int, bool) {
	var top [3]float64
	for _, x := range v {
		a, b, c := abs(x.X), abs(x.Y), abs(x.Z)
		if a > top[0] {
			top[0] = a
		}
		if b > top[1] {
			top[1] = b
		}
		if c > top[2] {
			top[2] = c
		}
	}
	lx, ly, lz := plateauLimit(top[0], floor), plateauLimit(top[1], floor), plateauLimit(top[2], floor)
	if math.IsInf(lx, 1) && math.IsInf(ly, 1) && math.IsInf(lz, 1) {
		return 0, false
	}
	rx, ry, rz := 0, 0, 0
	for i, x := range v {
		rx = runLength(rx, abs(x.X) >= lx)
		ry = runLength(ry, abs(x.Y) >= ly)
		rz = runLength(rz, abs(x.Z) >= lz)
		if rx >= PlateauSamples || ry >= PlateauSamples || rz >= PlateauSamples {
			return i - PlateauSamples + 1, true
		}
	}
	return 0, false
}

// plateauLimit returns the value a component must reach to count towards a
// plateau: its largest absolute value less the tolerance, or +Inf when that
// is below floor.
func plateauLimit(top, floor float64) float64 {
	if top < floor {
		return math.Inf(1)
	}
	return top * (1 - PlateauTolerance)
}

func runLength(run int, at bool) int {
	if at {
		return run + 1
	}
	return 0
}

// abs is math.Abs for finite values, written as a comparison so that the
// per-sample loops avoid the call.
func abs(x float64) float64 {
	if x < 0 {
		return -x
	}
	return x
}
