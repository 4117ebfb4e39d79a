package condition

import (
	"fmt"
	"math"
	"math/cmplx"
	"sort"
)

// SOS is a cascade of second-order sections, one row per section laid out
// as in scipy.signal: (b0, b1, b2, a0, a1, a2) with a0 = 1, the section's
// transfer function being (b0 + b1 z⁻¹ + b2 z⁻²) / (a0 + a1 z⁻¹ + a2 z⁻²).
type SOS [][6]float64

// MaxOrder is the highest Butterworth order Butterworth designs.
const MaxOrder = 12

// Butterworth returns the digital low-pass Butterworth filter of the given
// order whose magnitude response is 1/√2 (−3 dB) at cutoff Hz for the
// sampling rate fs Hz, as second-order sections.
//
// The design is the one of scipy.signal.butter(order, cutoff, fs=fs,
// output='sos'): the analog prototype poles −exp(iπm/(2N)), m = −N+1, −N+3,
// …, N−1, are scaled to the prewarped cutoff ω = 4·tan(π·Wn/2) with
// Wn = 2·cutoff/fs, mapped by the bilinear transform z = (4 + s)/(4 − s)
// (all N zeros at z = −1), and grouped into sections by scipy's zpk2sos
// "nearest" pairing, so that coefficients and section order match scipy's.
// Tested against scipy golden files (testdata/golden/scipy/butter.json).
//
// It returns an error unless 1 ≤ order ≤ MaxOrder, fs > 0 and
// 0 < cutoff < fs/2.
func Butterworth(order int, cutoff, fs float64) (SOS, error) {
	if order < 1 || order > MaxOrder {
		return nil, fmt.Errorf("butterworth: order %d outside 1..%d", order, MaxOrder)
	}
	if !(fs > 0) || math.IsInf(fs, 0) {
		return nil, fmt.Errorf("butterworth: sampling rate %g Hz is not positive and finite", fs)
	}
	if !(cutoff > 0 && cutoff < fs/2) {
		return nil, fmt.Errorf("butterworth: cutoff %g Hz outside (0, %g) Hz (the Nyquist frequency of %g Hz)", cutoff, fs/2, fs)
	}
	wn := 2 * cutoff / fs
	const fs2 = 4.0 // 2·fs with scipy's normalised fs = 2
	warped := 2 * 2 * math.Tan(math.Pi*wn/2)

	p := make([]complex128, order)
	z := make([]complex128, order)
	den := complex(1, 0)
	for i := range p {
		m := float64(-order + 1 + 2*i)
		a := -cmplx.Exp(complex(0, math.Pi*m/float64(2*order)))
		if m == 0 {
			a = -1 // exactly real, as scipy's buttap
		}
		a *= complex(warped, 0)
		den *= complex(fs2, 0) - a
		p[i] = (complex(fs2, 0) + a) / (complex(fs2, 0) - a)
		z[i] = -1
	}
	k := math.Pow(warped, float64(order)) * real(1/den)
	return zpk2sos(z, p, k), nil
}

// zpk2sos is scipy.signal.zpk2sos(z, p, k, pairing='nearest') for digital
// filters: poles closest to the unit circle go to the last sections, each
// paired with its nearest zeros, and the gain goes into the first section.
func zpk2sos(z, p []complex128, k float64) SOS {
	for len(p) < len(z) {
		p = append(p, 0)
	}
	for len(z) < len(p) {
		z = append(z, 0)
	}
	nsec := (len(p) + 1) / 2
	if len(p)%2 == 1 {
		p = append(p, 0)
		z = append(z, 0)
	}
	z = cplxreal(z)
	p = cplxreal(p)
	sos := make(SOS, nsec)
	for si := nsec - 1; si >= 0; si-- {
		i1 := idxWorst(p, nil)
		p1 := p[i1]
		p = remove(p, i1)
		switch {
		case isReal(p1) && countReal(p) == 0:
			j := nearest(z, p1, whichReal)
			z1 := z[j]
			z = remove(z, j)
			sos[si] = singleSection([]complex128{z1, 0}, []complex128{p1, 0})
		case len(p)+1 == len(z) && !isReal(p1) && countReal(p) == 1 && countReal(z) == 1:
			j := nearest(z, p1, whichComplex)
			z1 := z[j]
			z = remove(z, j)
			sos[si] = singleSection([]complex128{z1, cmplx.Conj(z1)}, []complex128{p1, cmplx.Conj(p1)})
		default:
			var p2 complex128
			if isReal(p1) {
				i2 := idxWorst(p, isReal)
				p2 = p[i2]
				p = remove(p, i2)
			} else {
				p2 = cmplx.Conj(p1)
			}
			if len(z) == 0 {
				sos[si] = singleSection(nil, []complex128{p1, p2})
				break
			}
			j := nearest(z, p1, whichAny)
			z1 := z[j]
			z = remove(z, j)
			switch {
			case !isReal(z1):
				sos[si] = singleSection([]complex128{z1, cmplx.Conj(z1)}, []complex128{p1, p2})
			case len(z) > 0:
				j2 := nearest(z, p1, whichReal)
				z2 := z[j2]
				z = remove(z, j2)
				sos[si] = singleSection([]complex128{z1, z2}, []complex128{p1, p2})
			default:
				sos[si] = singleSection([]complex128{z1}, []complex128{p1, p2})
			}
		}
	}
	for j := 0; j < 3; j++ {
		sos[0][j] *= k
	}
	return sos
}

// cplxreal is scipy's _cplxreal followed by concatenation: one member (the
// one with positive imaginary part) of each conjugate pair, sorted by real
// part, then the real values, sorted.
func cplxreal(v []complex128) []complex128 {
	tol := 100 * 2.220446049250313e-16
	w := append([]complex128(nil), v...)
	sort.SliceStable(w, func(i, j int) bool {
		if real(w[i]) != real(w[j]) {
			return real(w[i]) < real(w[j])
		}
		return math.Abs(imag(w[i])) < math.Abs(imag(w[j]))
	})
	var pos, neg, re []complex128
	for _, x := range w {
		switch {
		case math.Abs(imag(x)) <= tol*cmplx.Abs(x):
			re = append(re, complex(real(x), 0))
		case imag(x) > 0:
			pos = append(pos, x)
		default:
			neg = append(neg, x)
		}
	}
	// Pair members in sort order and average out rounding between them, as
	// scipy does. Unpaired members (not produced by Butterworth) are kept.
	cpx := pos
	for i := range cpx {
		if i < len(neg) {
			cpx[i] = (pos[i] + cmplx.Conj(neg[i])) / 2
		}
	}
	return append(cpx, re...)
}

func isReal(x complex128) bool { return imag(x) == 0 }

func countReal(v []complex128) int {
	n := 0
	for _, x := range v {
		if isReal(x) {
			n++
		}
	}
	return n
}

func remove(v []complex128, i int) []complex128 {
	return append(v[:i:i], v[i+1:]...)
}

// idxWorst returns the index of the element closest to the unit circle
// among those accepted by keep (all when keep is nil); ties go to the first.
func idxWorst(v []complex128, keep func(complex128) bool) int {
	best, bestD := -1, math.Inf(1)
	for i, x := range v {
		if keep != nil && !keep(x) {
			continue
		}
		if d := math.Abs(1 - cmplx.Abs(x)); d < bestD {
			best, bestD = i, d
		}
	}
	return best
}

const (
	whichAny = iota
	whichReal
	whichComplex
)

// nearest is scipy's _nearest_real_complex_idx: the index of the element of
// v of the requested kind closest to to.
func nearest(v []complex128, to complex128, which int) int {
	best, bestD := -1, math.Inf(1)
	for i, x := range v {
		if (which == whichReal && !isReal(x)) || (which == whichComplex && isReal(x)) {
			continue
		}
		if d := cmplx.Abs(x - to); d < bestD {
			best, bestD = i, d
		}
	}
	return best
}

// singleSection is scipy's _single_zpksos with unit gain: numerator and
// denominator polynomials of up to two zeros and poles, right-aligned.
func singleSection(z, p []complex128) [6]float64 {
	var s [6]float64
	b := poly(z)
	a := poly(p)
	copy(s[3-len(b):3], b)
	copy(s[6-len(a):6], a)
	return s
}

// poly returns the real coefficients, highest power first, of the monic
// polynomial with roots r (at most two, real or a conjugate pair).
func poly(r []complex128) []float64 {
	switch len(r) {
	case 0:
		return []float64{1}
	case 1:
		return []float64{1, -real(r[0])}
	default:
		return []float64{1, -real(r[0] + r[1]), real(r[0] * r[1])}
	}
}
