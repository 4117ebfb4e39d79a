package kinematics

import (
	"math"
	"testing"

	"github.com/kinchain/kinchain/internal/condition"
)

// Reference: closed form. Three-point quadratic interpolation is exact for
// a sampled parabola y = A − c(x − x₀)²: the refined value is A and the
// refined position x₀, for any sub-sample x₀.
func TestFindPeakParabola(t *testing.T) {
	for _, x0 := range []float64{10, 10.2, 10.49, 9.6, 9.51} {
		x := make([]float64, 21)
		for i := range x {
			d := float64(i) - x0
			x[i] = 7 - 0.3*d*d
		}
		p, ok := FindPeak(x, nil, 0, len(x))
		if !ok || math.Abs(p.Value-7) > 1e-12 || math.Abs(float64(p.Index)+p.Offset-x0) > 1e-12 {
			t.Errorf("x0 %g: peak %+v, want value 7 at %g", x0, p, x0)
		}
		if p.Offset < -0.5 || p.Offset > 0.5 {
			t.Errorf("x0 %g: offset %g outside ±0.5", x0, p.Offset)
		}
		g := condition.Grid{Start: 2, Rate: 100, N: len(x)}
		if got, want := p.Time(g), 2+x0/100; math.Abs(got-want) > 1e-12 {
			t.Errorf("x0 %g: time %g, want %g", x0, got, want)
		}
	}
}

// Reference: the contract of FindPeak/PeakSpeed: invalid samples and
// samples outside [lo, hi) are ignored, also as refinement neighbours;
// no valid sample gives no peak.
func TestFindPeakValidAndRange(t *testing.T) {
	x := []float64{1, 2, 9, 3, 5, 6, 5, 1}
	valid := []bool{true, true, false, true, true, true, true, true}
	p, ok := FindPeak(x, valid, 0, len(x))
	// 9 is invalid: the peak is 6 at index 5, refined by 5 and 5 (offset 0).
	if !ok || p.Index != 5 || p.Value != 6 || p.Offset != 0 {
		t.Errorf("peak %+v, want 6 at 5", p)
	}
	// A largest sample next to an invalid one is not refined.
	x2 := []float64{1, 2, 8, 3}
	p, _ = FindPeak(x2, []bool{true, false, true, true}, 0, 4)
	if p.Index != 2 || p.Value != 8 || p.Offset != 0 {
		t.Errorf("peak %+v, want 8 at 2 unrefined", p)
	}
	p, _ = FindPeak(x, nil, 3, 5)
	if p.Index != 4 || p.Offset != 0 {
		t.Errorf("range 3..5: peak %+v, want index 4 unrefined (edge of the range)", p)
	}
	if _, ok := FindPeak(x, make([]bool, len(x)), 0, len(x)); ok {
		t.Error("peak without valid samples")
	}
	seg := &Segment{Speed: x, Valid: make([]bool, len(x))}
	if v, i := PeakSpeed(seg); v != 0 || i != -1 {
		t.Errorf("PeakSpeed without valid samples = %g, %d", v, i)
	}
}
