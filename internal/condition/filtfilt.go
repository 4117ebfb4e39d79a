package condition

import (
	"gonum.org/v1/gonum/spatial/r3"
)

// Padlen returns the default edge-extension length of FiltFilt for sos,
// scipy.signal.sosfiltfilt's
//
//	3·(2·sections + 1 − min(#{b2 = 0}, #{a2 = 0})),
//
// where the subtraction discounts the pole and zero at the origin that an
// odd-order design places in one section.
func Padlen(sos SOS) int {
	nb, na := 0, 0
	for _, s := range sos {
		if s[2] == 0 {
			nb++
		}
		if s[5] == 0 {
			na++
		}
	}
	return 3 * (2*len(sos) + 1 - min(nb, na))
}

// InitialState returns the steady-state section states of sos for a unit
// step input (scipy.signal.sosfilt_zi): the states of the transposed direct
// form II sections after an infinitely long input of ones. For section j
// (a0 = 1) preceded by sections of total DC gain g,
//
//	z₀ = g·(b₁ − a₁b₀ + b₂ − a₂b₀) / (1 + a₁ + a₂),  z₁ = g·(b₂ − a₂b₀) − a₂·z₀,
//
// which is scipy.signal.lfilter_zi's 2×2 system (I − Aᵀ)z = B solved in
// closed form. Checked against scipy golden files.
func InitialState(sos SOS) [][2]float64 {
	zi := make([][2]float64, len(sos))
	scale := 1.0
	for j, s := range sos {
		b0, b1, b2 := s[0]/s[3], s[1]/s[3], s[2]/s[3]
		a1, a2 := s[4]/s[3], s[5]/s[3]
		B0 := b1 - a1*b0
		B1 := b2 - a2*b0
		z0 := (B0 + B1) / (1 + a1 + a2)
		zi[j] = [2]float64{scale * z0, scale * (B1 - a2*z0)}
		scale *= (s[0] + s[1] + s[2]) / (s[3] + s[4] + s[5])
	}
	return zi
}

// Filter applies a zero-phase (forward-backward) cascade of second-order
// sections. It keeps its work buffers between calls, so one Filter reused
// for many signals allocates only when a signal is longer than any before.
// A Filter is not safe for concurrent use.
type Filter struct {
	sos  SOS
	zi   [][2]float64
	pad  int
	buf  []float64
	vbuf []r3.Vec
}

// NewFilter returns a Filter for sos. Sections are normalised so that
// a0 = 1. An empty sos filters nothing (the output equals the input).
func NewFilter(sos SOS) *Filter {
	f := &Filter{}
	f.reset(sos)
	return f
}

// reset makes f filter with sos, keeping its work buffers.
func (f *Filter) reset(sos SOS) {
	n := make(SOS, len(sos))
	for i, s := range sos {
		for j := range s {
			n[i][j] = s[j] / s[3]
		}
	}
	f.sos, f.zi, f.pad = n, InitialState(n), Padlen(n)
}

// SOS returns the filter's sections.
func (f *Filter) SOS() SOS { return f.sos }

// PadlenFor returns the edge-extension length used for a signal of n
// samples: Padlen(sos), reduced to n − 1 when the signal is not longer than
// that (scipy.signal.sosfiltfilt rejects such signals with its default; the
// reduced length is what it accepts as an explicit padlen).
func (f *Filter) PadlenFor(n int) int {
	if n-1 < f.pad {
		return max(n-1, 0)
	}
	return f.pad
}

// Apply writes the zero-phase filtered x into dst and returns it; dst is
// grown when it is shorter than x and may be x itself.
//
// The steps are those of scipy.signal.sosfiltfilt(sos, x) with padtype
// 'odd': extend x at each end by p = PadlenFor(len(x)) samples by odd
// reflection (2·x₀ − x_{p…1} before, 2·x_{n−1} − x_{n−2…n−1−p} after), run the
// cascade forward from the steady state InitialState·(first extended sample),
// run it backward over the result from InitialState·(last output sample),
// and drop the extensions. Checked against scipy golden files
// (testdata/golden/scipy/sosfiltfilt.json).
func (f *Filter) Apply(dst, x []float64) []float64 {
	n := len(x)
	if cap(dst) < n {
		dst = make([]float64, n)
	}
	dst = dst[:n]
	if n == 0 {
		return dst
	}
	if len(f.sos) == 0 {
		copy(dst, x)
		return dst
	}
	p := f.PadlenFor(n)
	m := n + 2*p
	if cap(f.buf) < m {
		f.buf = make([]float64, m)
	}
	e := f.buf[:m]
	x0, xn := x[0], x[n-1]
	for i := 0; i < p; i++ {
		e[i] = 2*x0 - x[p-i]
		e[p+n+i] = 2*xn - x[n-2-i]
	}
	copy(e[p:p+n], x)

	f.forward(e)
	f.backward(e)
	copy(dst, e[p:p+n])
	return dst
}

// coefficients returns the section coefficients of the recursion used by
// the filter loops: b0, c1 = b1 − a1·b0, c2 = b2 − a2·b0, a1, a2 (a0 = 1).
// The transposed direct form II section
//
//	y = b0·x + z0,  z0' = b1·x − a1·y + z1,  z1' = b2·x − a2·y
//
// is evaluated with y substituted, z0' = c1·x + z1 − a1·z0 and
// z1' = c2·x − a2·z0: the same states and outputs (up to rounding), with a
// shorter chain of dependent operations per sample.
func coefficients(s [6]float64) (b0, c1, c2, a1, a2 float64) {
	b0, a1, a2 = s[0], s[4], s[5]
	return b0, s[1] - a1*b0, s[2] - a2*b0, a1, a2
}

// forward runs the cascade over e in place, from the steady state of its
// first sample (scipy: sosfilt(sos, e, zi=zi·e[0])).
func (f *Filter) forward(e []float64) {
	x0 := e[0]
	for j, s := range f.sos {
		b0, c1, c2, a1, a2 := coefficients(s)
		z0, z1 := f.zi[j][0]*x0, f.zi[j][1]*x0
		for i, x := range e {
			e[i] = b0*x + z0
			z0, z1 = c1*x+z1-a1*z0, c2*x-a2*z0
		}
	}
}

// backward runs the cascade over e in place from its last sample to its
// first, from the steady state of the last sample (scipy: the reversed
// sosfilt pass of sosfiltfilt).
func (f *Filter) backward(e []float64) {
	x0 := e[len(e)-1]
	for j, s := range f.sos {
		b0, c1, c2, a1, a2 := coefficients(s)
		z0, z1 := f.zi[j][0]*x0, f.zi[j][1]*x0
		for i := len(e) - 1; i >= 0; i-- {
			x := e[i]
			e[i] = b0*x + z0
			z0, z1 = c1*x+z1-a1*z0, c2*x-a2*z0
		}
	}
}

// ApplyVec is Apply for each component of a vector series at once (the
// three components are filtered independently, with the same result as
// three calls of Apply). dst may be x itself.
func (f *Filter) ApplyVec(dst, x []r3.Vec) []r3.Vec {
	n := len(x)
	if cap(dst) < n {
		dst = make([]r3.Vec, n)
	}
	dst = dst[:n]
	if n == 0 {
		return dst
	}
	if len(f.sos) == 0 {
		copy(dst, x)
		return dst
	}
	p := f.PadlenFor(n)
	m := n + 2*p
	if cap(f.vbuf) < m {
		f.vbuf = make([]r3.Vec, m)
	}
	e := f.vbuf[:m]
	x0, xn := x[0], x[n-1]
	for i := 0; i < p; i++ {
		a, b := x[p-i], x[n-2-i]
		e[i] = r3.Vec{X: 2*x0.X - a.X, Y: 2*x0.Y - a.Y, Z: 2*x0.Z - a.Z}
		e[p+n+i] = r3.Vec{X: 2*xn.X - b.X, Y: 2*xn.Y - b.Y, Z: 2*xn.Z - b.Z}
	}
	copy(e[p:p+n], x)
	f.forwardVec(e)
	f.backwardVec(e)
	copy(dst, e[p:p+n])
	return dst
}

func (f *Filter) forwardVec(e []r3.Vec) {
	v0 := e[0]
	for j, s := range f.sos {
		b0, c1, c2, a1, a2 := coefficients(s)
		zi0, zi1 := f.zi[j][0], f.zi[j][1]
		x0, x1 := zi0*v0.X, zi1*v0.X
		y0, y1 := zi0*v0.Y, zi1*v0.Y
		w0, w1 := zi0*v0.Z, zi1*v0.Z
		for i := range e {
			v := e[i]
			e[i] = r3.Vec{X: b0*v.X + x0, Y: b0*v.Y + y0, Z: b0*v.Z + w0}
			x0, x1 = c1*v.X+x1-a1*x0, c2*v.X-a2*x0
			y0, y1 = c1*v.Y+y1-a1*y0, c2*v.Y-a2*y0
			w0, w1 = c1*v.Z+w1-a1*w0, c2*v.Z-a2*w0
		}
	}
}

func (f *Filter) backwardVec(e []r3.Vec) {
	v0 := e[len(e)-1]
	for j, s := range f.sos {
		b0, c1, c2, a1, a2 := coefficients(s)
		zi0, zi1 := f.zi[j][0], f.zi[j][1]
		x0, x1 := zi0*v0.X, zi1*v0.X
		y0, y1 := zi0*v0.Y, zi1*v0.Y
		w0, w1 := zi0*v0.Z, zi1*v0.Z
		for i := len(e) - 1; i >= 0; i-- {
			v := e[i]
			e[i] = r3.Vec{X: b0*v.X + x0, Y: b0*v.Y + y0, Z: b0*v.Z + w0}
			x0, x1 = c1*v.X+x1-a1*x0, c2*v.X-a2*x0
			y0, y1 = c1*v.Y+y1-a1*y0, c2*v.Y-a2*y0
			w0, w1 = c1*v.Z+w1-a1*w0, c2*v.Z-a2*w0
		}
	}
}

// FiltFilt returns x filtered forward and backward by sos, with the edge
// handling of scipy.signal.sosfiltfilt (see Filter.Apply). It allocates; use
// a Filter to filter many signals.
func FiltFilt(sos SOS, x []float64) []float64 {
	return NewFilter(sos).Apply(nil, x)
}
