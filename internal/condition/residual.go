package condition

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/stat"
)

// Residual returns Winter's residual between x and its zero-phase
// Butterworth low-pass of the given order and cutoff (Hz) at sampling rate
// fs (Hz):
//
//	R(fc) = √( (1/N) Σᵢ (xᵢ − x̂ᵢ(fc))² ),
//
// in the units of x (Winter, Biomechanics and Motor Control of Human
// Movement, 4th ed., 2009, §3.4.4.3). work is reused as the filter's output
// buffer when large enough, and returned.
func Residual(x []float64, order int, cutoff, fs float64, work []float64) (float64, []float64, error) {
	return residual(&Filter{}, x, order, cutoff, fs, work)
}

// residual is Residual with a reusable filter.
func residual(f *Filter, x []float64, order int, cutoff, fs float64, work []float64) (float64, []float64, error) {
	sos, err := Butterworth(order, cutoff, fs)
	if err != nil {
		return 0, work, err
	}
	f.reset(sos)
	work = f.Apply(work, x)
	s := 0.0
	for i, v := range x {
		d := v - work[i]
		s += d * d
	}
	return math.Sqrt(s / float64(len(x))), work, nil
}

// Residual-analysis grid (see ResidualCutoff).
const (
	// residualFitLow and residualFitHigh bound the noise region as fractions
	// of the Nyquist frequency.
	residualFitLow  = 0.3
	residualFitHigh = 0.8
	// residualFitPoints is the number of cutoffs, evenly spaced over the
	// noise region, the straight line is fitted to.
	residualFitPoints = 21
	// residualStep is the spacing of the cutoff search, Hz (at most
	// Nyquist/200).
	residualStep = 0.5
)

// ResidualCutoff chooses a low-pass cutoff (Hz) for x sampled at fs Hz by
// Winter's residual analysis (Biomechanics and Motor Control of Human
// Movement, 4th ed., 2009, §3.4.4.3), with zero-phase Butterworth filters of
// the given order per pass:
//
//  1. compute the residual R(fc) (see Residual) at 21 cutoffs evenly spaced
//     over the noise region, 30 % to 80 % of the Nyquist frequency fN, where
//     R falls roughly linearly as more noise passes the filter;
//  2. fit a straight line R ≈ a + b·fc there by least squares (gonum
//     stat.LinearRegression); its intercept a estimates the noise's RMS;
//  3. step fc up from h = min(0.5 Hz, fN/200) in steps of h and return the
//     first cutoff where R(fc) ≤ a, interpolated linearly between the last
//     two steps (h itself when R(h) ≤ a already).
//
// When R stays above a up to 0.3·fN the signal has content throughout, and
// 0.3·fN is returned. The same procedure, written with scipy and numpy,
// produces testdata/golden/scipy/residual.json.
//
// It returns an error when x has fewer than 3 samples, fs is not positive
// and finite, or order is outside 1..MaxOrder.
func ResidualCutoff(x []float64, fs float64, order int) (float64, error) {
	if len(x) < 3 {
		return 0, fmt.Errorf("residual analysis: %d samples, need at least 3", len(x))
	}
	if !(fs > 0) || math.IsInf(fs, 0) {
		return 0, fmt.Errorf("residual analysis: sampling rate %g Hz is not positive and finite", fs)
	}
	if order < 1 || order > MaxOrder {
		return 0, fmt.Errorf("residual analysis: order %d outside 1..%d", order, MaxOrder)
	}
	fn := fs / 2
	var work []float64
	var err error
	f := &Filter{}
	fitF := make([]float64, residualFitPoints)
	fitR := make([]float64, residualFitPoints)
	for k := range fitF {
		fitF[k] = fn * (residualFitLow + (residualFitHigh-residualFitLow)*float64(k)/float64(residualFitPoints-1))
		if fitR[k], work, err = residual(f, x, order, fitF[k], fs, work); err != nil {
			return 0, err
		}
	}
	a, _ := stat.LinearRegression(fitF, fitR, nil, false)

	h := math.Min(residualStep, fn/200)
	limit := residualFitLow * fn
	prevF, prevR := 0.0, 0.0
	for j := 1; float64(j)*h < limit; j++ {
		fc := float64(j) * h
		var rf float64
		if rf, work, err = residual(f, x, order, fc, fs, work); err != nil {
			return 0, err
		}
		if rf <= a {
			if j == 1 {
				return fc, nil
			}
			return prevF + (prevR-a)/(prevR-rf)*h, nil
		}
		prevF, prevR = fc, rf
	}
	return limit, nil
}
