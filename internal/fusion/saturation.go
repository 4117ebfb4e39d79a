package fusion

import (
	"math"

	"gonum.org/v1/gonum/spatial/r3"
)

// Standard gravity, m/s² (CGPM 1901; ISO 80000-3).
const standardGravity = 9.80665

// Default sensor ranges. Consumer IMUs offer ±2000 °/s and ±16 g as their
// widest common settings; a golf club's shaft rotates faster than 2000 °/s
// near impact and its head sees more than 16 g at impact (common practice,
// no source).
const (
	DefaultGyroRange  = 2000 * deg           // rad/s
	DefaultAccelRange = 16 * standardGravity // m/s²
	defaultAtRange    = 0.99                 // fraction of the range
	defaultPlateauN   = 3                    // samples
	defaultPlateauMin = 0.25                 // fraction of the range
	plateauTol        = 1e-6                 // relative
)

// Sensor names the sensor a finding concerns.
type Sensor int

const (
	// Gyroscope readings.
	Gyroscope Sensor = iota + 1
	// Accelerometer readings.
	Accelerometer
)

// String returns "gyroscope" or "accelerometer".
func (s Sensor) String() string {
	switch s {
	case Gyroscope:
		return "gyroscope"
	case Accelerometer:
		return "accelerometer"
	}
	return "unknown sensor"
}

// Rule is a set of the reasons a sample was flagged.
type Rule uint8

const (
	// AtRange: |reading| ≥ AtRangeFraction × the configured range.
	AtRange Rule = 1 << iota
	// Plateau: the reading sits exactly at the axis's largest (or
	// smallest) value of the track for PlateauSamples or more consecutive
	// samples — a flat top, the sign of a sensor clipping at its own full
	// scale, whatever range was configured.
	Plateau
)

// Saturation is one run of consecutive samples on one axis where a sensor
// was at or past its range: the readings there understate the truth.
type Saturation struct {
	Sensor Sensor
	// Axis is 0, 1 or 2 for the sensor's x, y or z axis.
	Axis int
	// Start and End are the first and last sample index of the run.
	Start, End int
	// StartS and EndS are their times, s.
	StartS, EndS float64
	// Peak is the largest |reading| in the run: rad/s for the gyroscope,
	// m/s² for the accelerometer.
	Peak float64
	// Rule says which rules flagged the run.
	Rule Rule
}

// Samples returns the number of samples in the run.
func (s Saturation) Samples() int { return s.End - s.Start + 1 }

// detectSaturation returns the saturated runs of readings v (times t) of
// sensor s with full-scale range rng (rad/s or m/s², > 0), by the rules
// AtRange (|v_axis| ≥ atFrac·rng) and Plateau (≥ minRun consecutive samples
// within a relative 1e-6 of the axis's extreme value over the track, the
// extreme being at least plateauFrac·rng in magnitude).
//
// Source: common practice, no source — a clipped sensor repeats its
// full-scale code, so its readings show flat tops at the extreme.
func detectSaturation(s Sensor, t []float64, v []r3.Vec, rng, atFrac float64, minRun int, plateauFrac float64) []Saturation {
	n := len(v)
	if n == 0 {
		return nil
	}
	var out []Saturation
	flags := make([]Rule, n)
	for axis := 0; axis < 3; axis++ {
		comp := func(i int) float64 { return component(v[i], axis) }
		hi, lo := math.Inf(-1), math.Inf(1)
		any := false
		for i := range v {
			x := comp(i)
			hi = math.Max(hi, x)
			lo = math.Min(lo, x)
			f := Rule(0)
			if math.Abs(x) >= atFrac*rng {
				f = AtRange
				any = true
			}
			flags[i] = f
		}
		for _, ext := range [2]float64{hi, lo} {
			if math.Abs(ext) < plateauFrac*rng {
				continue
			}
			tol := plateauTol * math.Abs(ext)
			for i := 0; i < n; {
				if math.Abs(comp(i)-ext) > tol {
					i++
					continue
				}
				j := i
				for j+1 < n && math.Abs(comp(j+1)-ext) <= tol {
					j++
				}
				if j-i+1 >= minRun {
					for k := i; k <= j; k++ {
						flags[k] |= Plateau
					}
					any = true
				}
				i = j + 1
			}
		}
		if !any {
			continue
		}
		for i := 0; i < n; {
			if flags[i] == 0 {
				i++
				continue
			}
			r := Saturation{Sensor: s, Axis: axis, Start: i, StartS: t[i]}
			for ; i < n && flags[i] != 0; i++ {
				r.Rule |= flags[i]
				r.Peak = math.Max(r.Peak, math.Abs(comp(i)))
				r.End, r.EndS = i, t[i]
			}
			out = append(out, r)
		}
	}
	return out
}

func component(v r3.Vec, axis int) float64 {
	switch axis {
	case 0:
		return v.X
	case 1:
		return v.Y
	}
	return v.Z
}
