package fusion

import "math"

// lowpass holds the coefficients of a second-order Butterworth low-pass
// filter in direct form II transposed: y = b0·x + s0; s0' = b1·x − a1·y + s1;
// s1' = b2·x − a2·y (a0 = 1).
type lowpass struct {
	b0, b1, b2 float64
	a1, a2     float64
	tau, ts    float64
}

// butterworth returns the second-order Butterworth low-pass whose
// non-oscillating part of the step response has time constant tau (s), at
// sample interval ts (s): cutoff fc = √2/(2π·tau), bilinear transform with
// pre-warping C = tan(π·fc·ts), D = C² + √2·C + 1, b0 = C²/D, b1 = 2·b0,
// b2 = b0, a1 = 2(C² − 1)/D, a2 = (1 − √2·C + C²)/D.
//
// Source: Laidig & Seel 2023, Sec. 3 (the filter parametrised by a time
// constant, from memory) and the standard bilinear-transform Butterworth
// design (the same coefficients as scipy.signal.butter(2, fc, fs=1/ts)).
func butterworth(tau, ts float64) lowpass {
	fc := math.Sqrt2 / (2 * math.Pi) / tau
	c := math.Tan(math.Pi * fc * ts)
	d := c*c + math.Sqrt2*c + 1
	b0 := c * c / d
	return lowpass{
		b0: b0, b1: 2 * b0, b2: b0,
		a1:  2 * (c*c - 1) / d,
		a2:  (1 - math.Sqrt2*c + c*c) / d,
		tau: tau, ts: ts,
	}
}

// gainFromTau returns the gain k = 1 − exp(−ts/tau) of the first-order
// low-pass y += k·(x − y) with time constant tau (s) at interval ts (s);
// tau = 0 gives k = 1 and tau < 0 gives k = 0 (update disabled).
// Source: Laidig & Seel 2023 (from memory).
func gainFromTau(tau, ts float64) float64 {
	switch {
	case tau < 0:
		return 0
	case tau == 0:
		return 1
	default:
		return 1 - math.Exp(-ts/tau)
	}
}

// maxChannels is the widest signal filtered (a 3×3 matrix).
const maxChannels = 9

// lpState is the state of one multi-channel lowpass. Until tau seconds of
// samples have arrived, the output is the running mean of the input and
// the filter is then started in steady state at that mean, so that the
// output does not hinge on the first sample (Laidig & Seel 2023, from
// memory).
type lpState struct {
	running bool
	count   float64
	sum     [maxChannels]float64
	s       [maxChannels][2]float64
}

// filter runs one step of the lowpass f on the len(x) channels of x, writing
// into out (which may alias x).
func (st *lpState) filter(f *lowpass, x, out []float64) {
	if !st.running {
		st.count++
		for i, v := range x {
			st.sum[i] += v
			out[i] = st.sum[i] / st.count
		}
		if st.count*f.ts >= f.tau {
			// Steady state for a constant input x0 (scipy.signal.lfilter_zi):
			// s0 = x0·(1 − b0), s1 = x0·(b2 − a2).
			for i := range x {
				st.s[i][0] = out[i] * (1 - f.b0)
				st.s[i][1] = out[i] * (f.b2 - f.a2)
			}
			st.running = true
		}
		return
	}
	for i, v := range x {
		s := &st.s[i]
		y := f.b0*v + s[0]
		s[0] = f.b1*v - f.a1*y + s[1]
		s[1] = f.b2*v - f.a2*y
		out[i] = y
	}
}
