package stream

import (
	"math/rand/v2"
	"testing"

	"github.com/kinchain/kinchain/internal/capture"
)

// TestRingAgainstSlice checks the ring against the plain model of a
// bounded buffer (a slice that keeps its last limit entries), through
// growth, wrap-around and window copies.
func TestRingAgainstSlice(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 2))
	for _, limit := range []int{1, 2, 7, minRingAlloc, minRingAlloc + 3, 3*minRingAlloc + 1} {
		set := columnSet(1<<capture.ArrayQw | 1<<capture.ArrayQx | 1<<capture.ArrayQy | 1<<capture.ArrayQz)
		r := newRing(set, limit)
		var model [][2]float64 // (time, qx)
		tm := 0.0
		for step := 0; step < 4*limit+2500; step++ {
			tm += 0.001 + 0.001*rng.Float64()
			var a [capture.NumArrays][]float64
			a[capture.ArrayTime] = []float64{tm}
			a[capture.ArrayQw], a[capture.ArrayQx], a[capture.ArrayQy], a[capture.ArrayQz] = []float64{1}, []float64{tm * 2}, []float64{0}, []float64{0}
			r.push(&a, 0)
			model = append(model, [2]float64{tm, tm * 2})
			if len(model) > limit {
				model = model[1:]
			}
			if r.n != len(model) || r.size() > limit {
				t.Fatalf("limit %d step %d: ring holds %d (size %d), model %d", limit, step, r.n, r.size(), len(model))
			}
			if step%97 != 0 {
				continue
			}
			for i := range model {
				if r.time(i) != model[i][0] || r.at(capture.ArrayQx, i) != model[i][1] {
					t.Fatalf("limit %d step %d: sample %d is (%g, %g), model (%g, %g)", limit, step, i, r.time(i), r.at(capture.ArrayQx, i), model[i][0], model[i][1])
				}
			}
			// A window between two random samples, bounds inclusive.
			i0 := rng.IntN(len(model))
			i1 := i0 + rng.IntN(len(model)-i0)
			w := r.copyWindow(model[i0][0], model[i1][0])
			if len(w[capture.ArrayTime]) != i1-i0+1 || w[capture.ArrayGx] != nil {
				t.Fatalf("limit %d: window [%d, %d] has %d samples (gx %v)", limit, i0, i1, len(w[capture.ArrayTime]), w[capture.ArrayGx] != nil)
			}
			for k := range w[capture.ArrayTime] {
				if w[capture.ArrayTime][k] != model[i0+k][0] || w[capture.ArrayQx][k] != model[i0+k][1] {
					t.Fatalf("limit %d: window sample %d wrong", limit, k)
				}
			}
		}
		if r.total != int64(4*limit+2500) {
			t.Errorf("total %d", r.total)
		}
		if got, want := r.bytes(), limit*8*5; got > want {
			t.Errorf("limit %d: %d bytes, more than %d", limit, got, want)
		}
	}
}

// TestRingEmptyWindow: windows outside the samples are empty.
func TestRingEmptyWindow(t *testing.T) {
	r := newRing(0, 10)
	if w := r.copyWindow(0, 1); w[capture.ArrayTime] != nil {
		t.Error("window of an empty ring is not empty")
	}
	var a [capture.NumArrays][]float64
	a[capture.ArrayTime] = []float64{5}
	r.push(&a, 0)
	if w := r.copyWindow(6, 7); w[capture.ArrayTime] != nil {
		t.Error("window after the samples is not empty")
	}
	if w := r.copyWindow(1, 4); w[capture.ArrayTime] != nil {
		t.Error("window before the samples is not empty")
	}
	if w := r.copyWindow(5, 5); len(w[capture.ArrayTime]) != 1 {
		t.Error("window [5, 5] misses the sample at 5")
	}
}
