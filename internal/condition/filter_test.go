package condition

import (
	"math"
	"math/cmplx"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/spatial/r3"
)

// response returns the transfer function of sos at frequency f Hz for the
// sampling rate fs Hz: Π (b0 + b1 z⁻¹ + b2 z⁻²)/(a0 + a1 z⁻¹ + a2 z⁻²) at
// z = exp(2πi f/fs).
func response(sos SOS, f, fs float64) complex128 {
	zi := cmplx.Exp(complex(0, -2*math.Pi*f/fs))
	h := complex(1, 0)
	for _, s := range sos {
		num := complex(s[0], 0) + complex(s[1], 0)*zi + complex(s[2], 0)*zi*zi
		den := complex(s[3], 0) + complex(s[4], 0)*zi + complex(s[5], 0)*zi*zi
		h *= num / den
	}
	return h
}

// Reference: the definition of the Butterworth low-pass (Butterworth 1930;
// any DSP text): |H| = 1 at DC, 1/√2 (−3 dB) at the cutoff, 0 at Nyquist,
// and, with the bilinear transform's prewarping, |H(f)|² = 1/(1 + (tan(πf/fs)
// / tan(πfc/fs))^(2N)) exactly.
func TestButterworthResponse(t *testing.T) {
	for _, c := range []struct{ order, fc, fs float64 }{
		{1, 10, 100}, {2, 20, 1000}, {3, 6, 120}, {4, 50, 240}, {5, 100, 500}, {6, 15, 1000}, {8, 40, 200}, {12, 300, 1000},
	} {
		sos, err := Butterworth(int(c.order), c.fc, c.fs)
		if err != nil {
			t.Fatal(err)
		}
		for _, f := range []float64{0, c.fc / 3, c.fc, 1.7 * c.fc, 0.45 * c.fs} {
			got := cmplx.Abs(response(sos, f, c.fs))
			r := math.Tan(math.Pi*f/c.fs) / math.Tan(math.Pi*c.fc/c.fs)
			want := 1 / math.Sqrt(1+math.Pow(r, 2*c.order))
			if math.Abs(got-want) > 1e-10 {
				t.Errorf("order %g fc %g fs %g: |H(%g Hz)| = %.12f, want %.12f", c.order, c.fc, c.fs, f, got, want)
			}
		}
	}
}

func TestButterworthErrors(t *testing.T) {
	for _, c := range []struct {
		order  int
		fc, fs float64
		what   string
	}{
		{0, 10, 100, "order 0"}, {MaxOrder + 1, 10, 100, "order too high"}, {2, 0, 100, "cutoff 0"},
		{2, 50, 100, "cutoff at Nyquist"}, {2, 10, 0, "fs 0"}, {2, math.NaN(), 100, "NaN cutoff"}, {2, 10, math.Inf(1), "infinite fs"},
	} {
		if _, err := Butterworth(c.order, c.fc, c.fs); err == nil {
			t.Errorf("%s: no error", c.what)
		}
	}
}

// Reference: Filter.Apply (itself checked against scipy): ApplyVec filters
// each component as Apply does, to the last bit, and both work in place.
func TestApplyVecMatchesApply(t *testing.T) {
	r := rand.New(rand.NewPCG(1, 1))
	sos, _ := Butterworth(3, 20, 500)
	f := NewFilter(sos)
	for _, n := range []int{1, 2, 5, 13, 300} {
		v := make([]r3.Vec, n)
		xs, ys, zs := make([]float64, n), make([]float64, n), make([]float64, n)
		for i := range v {
			v[i] = r3.Vec{X: r.NormFloat64(), Y: r.NormFloat64() + 3, Z: float64(i)}
			xs[i], ys[i], zs[i] = v[i].X, v[i].Y, v[i].Z
		}
		out := f.ApplyVec(nil, v)
		fx, fy, fz := f.Apply(nil, xs), f.Apply(nil, ys), f.Apply(nil, zs)
		f.ApplyVec(v, v)
		f.Apply(xs, xs)
		for i := range out {
			if out[i].X != fx[i] || out[i].Y != fy[i] || out[i].Z != fz[i] {
				t.Fatalf("n %d: ApplyVec[%d] = %v, Apply gives (%g, %g, %g)", n, i, out[i], fx[i], fy[i], fz[i])
			}
			if v[i] != out[i] || xs[i] != fx[i] {
				t.Fatalf("n %d: in-place result differs at %d", n, i)
			}
		}
	}
}

// Reference: linear-filter facts: a low-pass with unit DC gain started in
// its steady state leaves a constant unchanged at any length; far from the
// ends (where the start transients have decayed), the zero-phase filter also
// leaves a straight line unchanged (the lags of the two passes cancel).
func TestFilterKeepsLines(t *testing.T) {
	sos, _ := Butterworth(4, 10, 200)
	f := NewFilter(sos)
	for _, n := range []int{1, 2, 3, 10, 100, 1000} {
		x := make([]float64, n)
		for i := range x {
			x[i] = 2.5
		}
		for i, y := range f.Apply(nil, x) {
			if math.Abs(y-2.5) > 1e-12 {
				t.Fatalf("n %d: constant filtered to %g at %d", n, y, i)
			}
		}
	}
	x := make([]float64, 1000)
	for i := range x {
		x[i] = 2.5 - 0.1*float64(i)
	}
	y := f.Apply(nil, x)
	for i := 200; i < 800; i++ {
		if math.Abs(y[i]-x[i]) > 1e-9 {
			t.Fatalf("ramp: y[%d] = %g, want %g", i, y[i], x[i])
		}
	}
	if got := (&Filter{}).Apply(nil, []float64{1, 2}); got[0] != 1 || got[1] != 2 {
		t.Errorf("empty filter changed the signal: %v", got)
	}
}
