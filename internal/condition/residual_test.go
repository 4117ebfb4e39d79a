package condition

import (
	"math"
	"math/rand/v2"
	"testing"
)

// Reference: an independent implementation of the same procedure with
// scipy.signal.butter/sosfiltfilt and numpy.polyfit (golden residual.json,
// testdata/golden/scipy/gen.py). Tolerance 1e-9 Hz: both sides evaluate the
// same filters to ~1e-12 (observed differences below 2e-13 Hz).
func TestResidualCutoffAgainstScipy(t *testing.T) {
	var g struct {
		Cases []struct {
			Fs        float64   `json:"fs_hz"`
			Order     int       `json:"order"`
			X         []float64 `json:"x"`
			Cutoff    float64   `json:"cutoff_hz"`
			Intercept float64   `json:"intercept"`
		}
	}
	readGolden(t, "residual.json", &g)
	if len(g.Cases) == 0 {
		t.Fatal("no golden cases")
	}
	for _, c := range g.Cases {
		got, err := ResidualCutoff(c.X, c.Fs, c.Order)
		if err != nil {
			t.Fatal(err)
		}
		if math.Abs(got-c.Cutoff) > 1e-9 {
			t.Errorf("fs %g order %d: cutoff %.9g Hz, scipy/numpy %.9g Hz", c.Fs, c.Order, got, c.Cutoff)
		}
	}
}

// Reference: Winter (4th ed., §3.4.4.3): for a signal of known content plus
// white noise, the chosen cutoff lies above the signal's highest frequency
// and well below the noise region; more noise lowers it (the residual line's
// intercept, the noise RMS estimate, rises). The intercept itself must
// estimate the noise standard deviation (checked through Residual at the
// chosen cutoff: R there equals the intercept, which we compare with σ
// within +10 %/−5 %: the straight-line fit over 30–80 % of Nyquist overestimates
// white noise slightly, as the exact curve is σ·√(1 − fc/fN)).
func TestResidualCutoffSignalPlusNoise(t *testing.T) {
	const fs, n = 500.0, 2000
	r := rand.New(rand.NewPCG(11, 12))
	signal := make([]float64, n)
	for i := range signal {
		tt := float64(i) / fs
		signal[i] = math.Sin(2*math.Pi*1.5*tt) + 0.5*math.Sin(2*math.Pi*4*tt+1) + 0.3*math.Sin(2*math.Pi*7*tt+2)
	}
	prev := math.Inf(1)
	for _, sigma := range []float64{0.01, 0.03, 0.1} {
		x := make([]float64, n)
		for i := range x {
			x[i] = signal[i] + sigma*r.NormFloat64()
		}
		fc, err := ResidualCutoff(x, fs, 2)
		if err != nil {
			t.Fatal(err)
		}
		if fc <= 7 || fc >= 0.3*fs/2 {
			t.Errorf("σ %g: cutoff %.2f Hz, want above the 7 Hz signal band and below %.0f Hz", sigma, fc, 0.3*fs/2)
		}
		if fc >= prev {
			t.Errorf("σ %g: cutoff %.2f Hz not below %.2f Hz for less noise", sigma, fc, prev)
		}
		prev = fc
		rr, _, err := Residual(x, 2, fc, fs, nil)
		if err != nil {
			t.Fatal(err)
		}
		if rr < 0.95*sigma || rr > 1.10*sigma {
			t.Errorf("σ %g: residual at the chosen cutoff %g, want the noise level within +10 %%/−5 %%", sigma, rr)
		}
	}
}

func TestResidualCutoffErrors(t *testing.T) {
	if _, err := ResidualCutoff([]float64{1, 2}, 100, 2); err == nil {
		t.Error("2 samples: no error")
	}
	if _, err := ResidualCutoff(make([]float64, 10), 0, 2); err == nil {
		t.Error("fs 0: no error")
	}
	if _, err := ResidualCutoff(make([]float64, 10), 100, 0); err == nil {
		t.Error("order 0: no error")
	}
}
