package condition

import (
	"math"
	"slices"
)

// median returns the median of v (the mean of the two middle values when
// len(v) is even; NaN when v is empty), reordering v. It selects in
// expected linear time (Hoare's quickselect with a median-of-three pivot and
// a three-way partition, so runs of equal values cost one pass), falling back
// to sorting after 2·log₂(n)+8 rounds.
func median(v []float64) float64 {
	n := len(v)
	if n == 0 {
		return math.NaN()
	}
	k := n / 2
	hi := selectKth(v, k)
	if n%2 == 1 {
		return hi
	}
	// The lower middle value is the largest of v[:k], which selectKth left
	// holding the k smallest values.
	lo := v[0]
	for _, x := range v[1:k] {
		if x > lo {
			lo = x
		}
	}
	return (lo + hi) / 2
}

// selectKth reorders v so that v[k] holds the k-th smallest value, v[:k]
// no larger values and v[k+1:] no smaller ones, and returns v[k].
func selectKth(v []float64, k int) float64 {
	lo, hi := 0, len(v)
	budget := 8
	for n := len(v); n > 0; n >>= 1 {
		budget += 2
	}
	for hi-lo > 1 {
		if budget == 0 {
			slices.Sort(v[lo:hi])
			return v[k]
		}
		budget--
		a, b, c := v[lo], v[lo+(hi-lo)/2], v[hi-1]
		pivot := max(min(a, b), min(max(a, b), c))
		// Three-way partition: [lo,lt) < pivot, [lt,gt) == pivot, [gt,hi) > pivot.
		lt, i, gt := lo, lo, hi
		for i < gt {
			switch x := v[i]; {
			case x < pivot:
				v[lt], v[i] = v[i], v[lt]
				lt++
				i++
			case x > pivot:
				gt--
				v[gt], v[i] = v[i], v[gt]
			default:
				i++
			}
		}
		switch {
		case k < lt:
			hi = lt
		case k >= gt:
			lo = gt
		default:
			return pivot
		}
	}
	return v[k]
}
