package stream

import (
	"fmt"

	"github.com/kinchain/kinchain/internal/condition"
)

// maxSections bounds the sections of a causal filter (order ≤ 4).
const maxSections = 2

// causal is a causal (one-pass) low-pass filter of up to three channels:
// the Butterworth design of condition.Butterworth run forward only, in
// transposed direct form II section by section, as scipy.signal.sosfilt:
//
//	y = b0·x + z0,  z0' = b1·x − a1·y + z1,  z1' = b2·x − a2·y.
//
// The first sample after a reset starts every section in the steady state
// for that input (scipy.signal.sosfilt_zi scaled by it), so a constant
// input passes unchanged from the start. It has no delay-free output: a
// Butterworth low-pass of order n and cutoff fc delays slow content by its
// group delay, for n = 2 about √2/(2π·fc) s (0.0113 s at 20 Hz).
type causal struct {
	sec   [maxSections][6]float64
	zi    [maxSections][2]float64
	n     int
	z     [maxSections][2][3]float64
	ready bool
}

// newCausal designs a causal Butterworth low-pass of the given order (1..4)
// and cutoff Hz for rate Hz.
func newCausal(order int, cutoff, rate float64) (causal, error) {
	var f causal
	sos, err := condition.Butterworth(order, cutoff, rate)
	if err != nil {
		return f, err
	}
	if len(sos) > maxSections {
		return f, fmt.Errorf("causal filter: %d sections, more than %d", len(sos), maxSections)
	}
	norm := make(condition.SOS, len(sos))
	for i, s := range sos {
		for j := range s {
			norm[i][j] = s[j] / s[3]
		}
		f.sec[i] = norm[i]
	}
	zi := condition.InitialState(norm)
	copy(f.zi[:], zi)
	f.n = len(sos)
	return f, nil
}

// reset makes the next sample start the filter afresh.
func (f *causal) reset() { f.ready = false }

// step filters one sample of k ≤ 3 channels in place.
func (f *causal) step(x *[3]float64, k int) {
	if !f.ready {
		for i := 0; i < f.n; i++ {
			// The steady state for a constant input x: sosfilt_zi × x.
			for c := 0; c < k; c++ {
				f.z[i][0][c] = f.zi[i][0] * x[c]
				f.z[i][1][c] = f.zi[i][1] * x[c]
			}
		}
		f.ready = true
	}
	for i := 0; i < f.n; i++ {
		s := &f.sec[i]
		z := &f.z[i]
		for c := 0; c < k; c++ {
			in := x[c]
			y := s[0]*in + z[0][c]
			z[0][c] = s[1]*in - s[4]*y + z[1][c]
			z[1][c] = s[2]*in - s[5]*y
			x[c] = y
		}
	}
}
