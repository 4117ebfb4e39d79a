package stream

import (
	"math"
	"testing"
)

// TestCausalAgainstScipy checks the causal filter, started in the steady
// state of its first sample, against scipy.signal.sosfilt(sos, x,
// zi=sosfilt_zi(sos)·x[0]) with sos = scipy.signal.butter(order, fc, fs=fs,
// output='sos') (scipy 1.10.1, Debian python3-scipy, run as
// /usr/bin/python3), and its group delay at 0 Hz against
// scipy.signal.group_delay of sos2tf(sos) at ω → 0. The values were
// printed with '%.17g'.
func TestCausalAgainstScipy(t *testing.T) {
	x := []float64{1.0, 2.0, -1.0, 0.5, 3.0, 3.0, 3.0, -2.0, 0.0, 1.0, 4.0, 4.0}
	cases := []struct {
		order     int
		fc, fs    float64
		want      []float64
		delaySamp float64
	}{
		{2, 20, 1000, []float64{1.0000000000000009, 1.0036216815149293, 1.0066012205179382, 0.9963241205249057, 0.984151890926671, 0.9941103591989705, 1.0315061798434586, 1.0732218978688906, 1.08897637841811, 1.0827683564644144, 1.0836154349175302, 1.1157084131899968}, 11.239140442970927},
		{2, 20, 120, []float64{1.0, 1.1550510257216822, 1.0961632823093832, 0.47968673331236306, 0.49913010933096336, 1.667226659148389, 2.774638149074384, 2.4053841743902074, 0.6697323291643722, -0.31795438089907246, 0.5721003951627929, 2.4469211889547076}, 1.2247448713915894},
		{4, 30, 1000, []float64{0.999999999999999, 1.0000623869835477, 1.0003436141675084, 1.00075982567611, 1.0007426361756986, 0.9999830570616431, 0.9994911811033519, 1.001395176892116, 1.0073169701237454, 1.0170576739439148, 1.0292034357899287, 1.042991609676187}, 13.821992407700989},
	}
	for _, c := range cases {
		f, err := newCausal(c.order, c.fc, c.fs)
		if err != nil {
			t.Fatal(err)
		}
		for i, xi := range x {
			// Three channels at once: the same input, scaled.
			v := [3]float64{xi, -2 * xi, 0.5 * xi}
			f.step(&v, 3)
			for ch, k := range [3]float64{1, -2, 0.5} {
				if d := math.Abs(v[ch] - k*c.want[i]); d > 1e-12*math.Max(1, math.Abs(k*c.want[i])) {
					t.Errorf("order %d, %g Hz at %g Hz: y[%d] channel %d = %.17g, scipy %.17g", c.order, c.fc, c.fs, i, ch, v[ch], k*c.want[i])
				}
			}
		}
		if g := groupDelay(&f); math.Abs(g-c.delaySamp) > 1e-6 {
			t.Errorf("order %d, %g Hz at %g Hz: group delay %.12g samples, scipy %.12g", c.order, c.fc, c.fs, g, c.delaySamp)
		}
		// A reset restarts in the steady state of the next input.
		f.reset()
		v := [3]float64{7, 7, 7}
		f.step(&v, 1)
		if math.Abs(v[0]-7) > 1e-12 {
			t.Errorf("after reset, a first sample of 7 gave %g", v[0])
		}
	}
	// The rule of thumb for a second-order Butterworth low-pass: group
	// delay √2/(2π·fc) at low frequency (the analog prototype, from
	// memory), which the bilinear design approaches at fc ≪ fs.
	f, _ := newCausal(2, 20, 1000)
	if g, want := groupDelay(&f)/1000, math.Sqrt2/(2*math.Pi*20); math.Abs(g-want) > 0.002*want {
		t.Errorf("group delay %.6f s, analog prototype %.6f s", g, want)
	}
	if _, err := newCausal(2, 600, 1000); err == nil {
		t.Error("a cutoff above Nyquist was accepted")
	}
}
