package server

import (
	"math/bits"
	"sync"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/capture"
)

// Recycling the sample arrays of binary requests.
//
// Decoding a protobuf capture is mostly allocating its sample arrays
// (720 KB for a 3 s six-segment 1000 Hz capture) and zeroing that fresh
// memory, and the arrays are garbage as soon as validation has copied them
// into the engine's own form. The server decodes gRPC and HTTP protobuf
// requests into arrays from floats (decode.FileWith) and gives them back
// when the call's analysis has returned (releaseRequest): the engine keeps
// nothing of a request, and its response holds arrays of its own
// (TestResponseOwnsItsArrays). JSON and CSV bodies are decoded as before,
// and so are stream batches, whose arrays of a few samples cost less to
// allocate than to recycle (decodeBatch).
//
// Only requests of up to maxPooledBytes are recycled. Pooled memory stays
// live until the second garbage collection after it was given back, so
// for requests near the body limit, which run a few at a time and whose
// analysis dwarfs the allocation, the pool would mostly raise the peak
// (deploy's BenchmarkCapacity, eight 64 MiB requests at once: peak RSS
// 1783–1877 MiB in three runs with them recycled, 1715–1809 MiB in two
// without, against the 2 GiB limit of the Kubernetes base).
const maxPooledBytes = 32 << 20

// floatPool is a decode.Floats of recycled []float64. Slices are kept in
// size classes m·2^e (m = 4…7, e ≥ minPoolShift), so a slice has at most
// 25 % more room than asked for; lengths outside the classes are allocated
// and not kept. sync.Pool drops what is not reused within two garbage
// collections, so idle memory does not stay held.
type floatPool struct {
	classes [poolClasses]sync.Pool
}

const (
	minPoolShift = 6  // smallest class: 4·2^6 = 256 samples
	maxPoolShift = 22 // largest: 7·2^22 ≈ 29 M samples (235 MB)
	poolClasses  = (maxPoolShift - minPoolShift + 1) * 4
)

// floats is the server's pool of sample arrays.
var floats = &floatPool{}

// sizeClass returns the class of n samples and its size; ok is false
// outside the classes.
func sizeClass(n int) (class, size int, ok bool) {
	e := max(bits.Len(uint(n))-3, minPoolShift) // n < 8·2^e
	m := max((n+1<<e-1)>>e, 4)                  // ⌈n / 2^e⌉, 4…8
	if m == 8 {
		m, e = 4, e+1
	}
	if e > maxPoolShift {
		return 0, 0, false
	}
	return (e-minPoolShift)*4 + m - 4, m << e, true
}

// Get returns a slice of length n; its contents are arbitrary.
func (p *floatPool) Get(n int) []float64 {
	c, size, ok := sizeClass(n)
	if !ok {
		return make([]float64, n)
	}
	if v, _ := p.classes[c].Get().(*[]float64); v != nil {
		return (*v)[:n]
	}
	return make([]float64, n, size)
}

// put keeps s for reuse when its capacity is a class size (slices from
// Get); it must not be used afterwards.
func (p *floatPool) put(s []float64) {
	c, size, ok := sizeClass(cap(s))
	if !ok || size != cap(s) {
		return
	}
	s = s[:0]
	p.classes[c].Put(&s)
}

// releaseRequest gives the sample arrays of req's tracks to the pool and
// clears them from req.
func releaseRequest(req *kinchainv1.AnalyzeCaptureRequest) {
	for _, t := range req.GetCapture().GetTracks() {
		for _, a := range capture.TrackArrays(t) {
			if a != nil {
				floats.put(a)
			}
		}
		capture.SetTrackArrays(t, &[capture.NumArrays][]float64{})
	}
}
