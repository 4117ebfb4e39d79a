package kinematics

import "github.com/kinchain/kinchain/internal/condition"

// Peak is the largest value of a series over a range of valid samples.
type Peak struct {
	// Value is the peak height after parabolic refinement, in the series'
	// units.
	Value float64
	// Index is the sample with the largest value.
	Index int
	// Offset is the refined peak position relative to Index, in samples,
	// within [−0.5, 0.5].
	Offset float64
}

// Time returns the refined peak time on grid g, s.
func (p Peak) Time(g condition.Grid) float64 {
	return g.Start + (float64(p.Index)+p.Offset)/g.Rate
}

// FindPeak returns the peak of x over the valid samples lo ≤ i < hi (valid
// nil: all valid); ok is false when there is none. The largest sample (the
// first of equal ones) is refined by the parabola through it and its two
// neighbours y₋, y₀, y₊ when both are valid and inside [lo, hi):
//
//	δ = (y₋ − y₊) / (2·(y₋ − 2y₀ + y₊)),  value = y₀ − (y₋ − y₊)·δ/4,
//
// the vertex of the parabola through the three points (three-point
// quadratic peak interpolation). δ lies in [−0.5, 0.5] because y₀ is the
// largest of the three.
func FindPeak(x []float64, valid []bool, lo, hi int) (p Peak, ok bool) {
	lo, hi = max(lo, 0), min(hi, len(x))
	best := -1
	for i := lo; i < hi; i++ {
		if valid != nil && !valid[i] {
			continue
		}
		if best < 0 || x[i] > x[best] {
			best = i
		}
	}
	if best < 0 {
		return Peak{}, false
	}
	p = Peak{Value: x[best], Index: best}
	i := best
	if i-1 < lo || i+1 >= hi || (valid != nil && (!valid[i-1] || !valid[i+1])) {
		return p, true
	}
	ym, y0, yp := x[i-1], x[i], x[i+1]
	den := ym - 2*y0 + yp
	if den >= 0 {
		return p, true // flat top: no curvature to refine with
	}
	p.Offset = (ym - yp) / (2 * den)
	p.Value = y0 - (ym-yp)*p.Offset/4
	return p, true
}

// PeakSpeed returns the peak of seg.Speed over its valid samples, refined
// as in FindPeak, and the index of the largest sample; (0, −1) when no
// sample is valid. The refined time is PeakSpeedIn's Peak.Time.
func PeakSpeed(seg *Segment) (value float64, index int) {
	p, ok := FindPeak(seg.Speed, seg.Valid, 0, len(seg.Speed))
	if !ok {
		return 0, -1
	}
	return p.Value, p.Index
}

// PeakSpeedIn returns the refined peak of seg.Speed over the valid samples
// lo ≤ i < hi, e.g. one swing's window.
func PeakSpeedIn(seg *Segment, lo, hi int) (Peak, bool) {
	return FindPeak(seg.Speed, seg.Valid, lo, hi)
}
