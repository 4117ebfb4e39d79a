package stream

import (
	"sort"

	"github.com/kinchain/kinchain/internal/capture"
)

// ring holds the newest samples of one segment in fixed-capacity circular
// columns, one per array the segment sends (column capture.ArrayTime
// always). Storage grows by doubling as samples arrive until it reaches the
// capacity, and is never grown past it: from then on each new sample overwrites the oldest.
type ring struct {
	cols  [capture.NumArrays][]float64 // nil for arrays the segment does not send
	set   columnSet
	have  [capture.NumArrays]uint8 // the indices of the non-nil columns
	nhave int
	limit int   // capacity in samples
	start int   // physical index of the oldest sample
	n     int   // samples held
	total int64 // samples ever pushed
}

// minRingAlloc is the first allocation of a ring, samples.
const minRingAlloc = 1024

// newRing returns an empty ring for the arrays in set, holding at most limit
// samples.
func newRing(set columnSet, limit int) *ring {
	r := &ring{set: set | 1<<capture.ArrayTime, limit: limit}
	alloc := min(limit, minRingAlloc)
	for k := 0; k < capture.NumArrays; k++ {
		if r.set.has(k) {
			r.cols[k] = make([]float64, alloc)
			r.have[r.nhave] = uint8(k)
			r.nhave++
		}
	}
	return r
}

// size returns the allocated samples per column.
func (r *ring) size() int { return len(r.cols[capture.ArrayTime]) }

// bytes returns the memory held by the columns, bytes.
func (r *ring) bytes() int { return r.size() * 8 * r.set.count() }

// grow doubles the storage, up to limit. The ring has not wrapped while it
// is smaller than its limit, so the samples are in order from index 0.
func (r *ring) grow() {
	n := min(2*r.size(), r.limit)
	for k := range r.cols {
		if c := r.cols[k]; c != nil {
			nc := make([]float64, n)
			copy(nc, c)
			r.cols[k] = nc
		}
	}
}

// push appends sample j of the arrays a (indexed by the a* constants; only
// the ring's columns are read).
func (r *ring) push(a *[capture.NumArrays][]float64, j int) {
	if r.n == r.size() && r.size() < r.limit {
		r.grow()
	}
	var p int
	if r.n < r.size() {
		p = r.start + r.n
		if p >= r.size() {
			p -= r.size()
		}
		r.n++
	} else {
		p = r.start
		r.start++
		if r.start == r.size() {
			r.start = 0
		}
	}
	for _, k := range r.have[:r.nhave] {
		r.cols[k][p] = a[k][j]
	}
	r.total++
}

// phys returns the physical index of logical sample i (0 = oldest).
func (r *ring) phys(i int) int {
	p := r.start + i
	if p >= r.size() {
		p -= r.size()
	}
	return p
}

// at returns column k of logical sample i.
func (r *ring) at(k, i int) float64 { return r.cols[k][r.phys(i)] }

// time returns the time of logical sample i.
func (r *ring) time(i int) float64 { return r.cols[capture.ArrayTime][r.phys(i)] }

// first and last return the oldest and newest sample times; ok is false
// when the ring is empty.
func (r *ring) first() (float64, bool) {
	if r.n == 0 {
		return 0, false
	}
	return r.time(0), true
}

func (r *ring) last() (float64, bool) {
	if r.n == 0 {
		return 0, false
	}
	return r.time(r.n - 1), true
}

// search returns the first logical index whose time is ≥ t (r.n if none).
func (r *ring) search(t float64) int {
	return sort.Search(r.n, func(i int) bool { return r.time(i) >= t })
}

// copyWindow copies the samples with t0 ≤ time ≤ t1 into fresh arrays
// (nil for the columns the ring lacks).
func (r *ring) copyWindow(t0, t1 float64) [capture.NumArrays][]float64 {
	var out [capture.NumArrays][]float64
	i0 := r.search(t0)
	i1 := r.search(t1)
	if i1 < r.n && r.time(i1) == t1 {
		i1++
	}
	if i1 <= i0 {
		return out
	}
	m := i1 - i0
	for k := range r.cols {
		c := r.cols[k]
		if c == nil {
			continue
		}
		dst := make([]float64, m)
		// At most two contiguous runs.
		p := r.phys(i0)
		n1 := min(m, r.size()-p)
		copy(dst, c[p:p+n1])
		copy(dst[n1:], c[:m-n1])
		out[k] = dst
	}
	return out
}
