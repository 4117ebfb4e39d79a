package condition

import (
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"testing"
)

// goldenDir holds the scipy golden files written by
// testdata/golden/scipy/gen.py (Debian python3-scipy).
var goldenDir = filepath.Join("..", "..", "testdata", "golden", "scipy")

func readGolden(t testing.TB, name string, v any) {
	t.Helper()
	b, err := os.ReadFile(filepath.Join(goldenDir, name))
	if err != nil {
		t.Fatalf("golden file: %v (regenerate with /usr/bin/python3 testdata/golden/scipy/gen.py)", err)
	}
	if err := json.Unmarshal(b, v); err != nil {
		t.Fatalf("golden file %s: %v", name, err)
	}
}

type butterCase struct {
	Order         int          `json:"order"`
	Cutoff        float64      `json:"cutoff_hz"`
	Fs            float64      `json:"fs_hz"`
	SOS           [][6]float64 `json:"sos"`
	ZI            [][2]float64 `json:"zi"`
	DefaultPadlen int          `json:"default_padlen"`
}

// Reference: scipy.signal.butter(N, fc, fs=fs, output='sos') and
// scipy.signal.sosfilt_zi (golden butter.json). Tolerance: 1e-13 relative to
// the largest coefficient of the section (the design is a handful of
// complex operations; the observed differences are below 1e-15), except for
// the gain-carrying numerator of the first section, which can be tiny for
// low cutoffs and is compared relative to itself. Zero coefficients must be
// exactly zero: they decide the default padlen.
func TestButterworthAgainstScipy(t *testing.T) {
	var g struct{ Cases []butterCase }
	readGolden(t, "butter.json", &g)
	if len(g.Cases) < 10 {
		t.Fatalf("only %d golden cases", len(g.Cases))
	}
	for _, c := range g.Cases {
		sos, err := Butterworth(c.Order, c.Cutoff, c.Fs)
		if err != nil {
			t.Fatalf("order %d fc %g fs %g: %v", c.Order, c.Cutoff, c.Fs, err)
		}
		if len(sos) != len(c.SOS) {
			t.Fatalf("order %d fc %g fs %g: %d sections, scipy %d", c.Order, c.Cutoff, c.Fs, len(sos), len(c.SOS))
		}
		for i := range sos {
			scale := 0.0
			for j := 0; j < 6; j++ {
				scale = math.Max(scale, math.Abs(c.SOS[i][j]))
			}
			for j := 0; j < 6; j++ {
				tol := 1e-13 * scale
				if i == 0 && j < 3 {
					tol = 1e-13 * math.Abs(c.SOS[i][j])
				}
				if d := math.Abs(sos[i][j] - c.SOS[i][j]); d > tol || (c.SOS[i][j] == 0) != (sos[i][j] == 0) {
					t.Errorf("order %d fc %g fs %g: sos[%d][%d] = %.17g, scipy %.17g", c.Order, c.Cutoff, c.Fs, i, j, sos[i][j], c.SOS[i][j])
				}
			}
		}
		if got := Padlen(sos); got != c.DefaultPadlen {
			t.Errorf("order %d: Padlen = %d, scipy %d", c.Order, got, c.DefaultPadlen)
		}
		zi := InitialState(sos)
		for i := range zi {
			for j := 0; j < 2; j++ {
				if d := math.Abs(zi[i][j] - c.ZI[i][j]); d > 1e-10*math.Max(1, math.Abs(c.ZI[i][j])) {
					t.Errorf("order %d fc %g fs %g: zi[%d][%d] = %.17g, scipy %.17g", c.Order, c.Cutoff, c.Fs, i, j, zi[i][j], c.ZI[i][j])
				}
			}
		}
	}
}

// Reference: scipy.signal.sosfiltfilt (golden sosfiltfilt.json), default
// padtype 'odd' and default padlen, or padlen = len(x) − 1 for signals not
// longer than the default. Tolerance: 1e-10 absolute on signals of size 1–10
// (observed below 3e-12; the low-cutoff cases have poles within 1e-2 of
// z = 1, where rounding in the recursion is amplified by about 1/(1 − |p|)).
func TestFiltFiltAgainstScipy(t *testing.T) {
	var g struct {
		Cases []struct {
			Order  int       `json:"order"`
			Cutoff float64   `json:"cutoff_hz"`
			Fs     float64   `json:"fs_hz"`
			Padlen *int      `json:"padlen"`
			X      []float64 `json:"x"`
			Y      []float64 `json:"y"`
		}
	}
	readGolden(t, "sosfiltfilt.json", &g)
	short := 0
	for _, c := range g.Cases {
		sos, err := Butterworth(c.Order, c.Cutoff, c.Fs)
		if err != nil {
			t.Fatal(err)
		}
		f := NewFilter(sos)
		wantPad := Padlen(sos)
		if c.Padlen != nil {
			wantPad = *c.Padlen
			short++
		}
		if got := f.PadlenFor(len(c.X)); got != wantPad {
			t.Errorf("order %d n %d: PadlenFor = %d, scipy used %d", c.Order, len(c.X), got, wantPad)
		}
		y := f.Apply(nil, c.X)
		for i := range y {
			if d := math.Abs(y[i] - c.Y[i]); d > 1e-10 || math.IsNaN(y[i]) {
				t.Fatalf("order %d fc %g fs %g n %d: y[%d] = %.17g, scipy %.17g", c.Order, c.Cutoff, c.Fs, len(c.X), i, y[i], c.Y[i])
			}
		}
		if y2 := FiltFilt(sos, c.X); !equalFloats(y, y2) {
			t.Fatalf("FiltFilt differs from Filter.Apply")
		}
	}
	if short < 10 {
		t.Fatalf("only %d short-signal golden cases", short)
	}
}

func equalFloats(a, b []float64) bool {
	if len(a) != len(b) {
		return false
	}
	for i := range a {
		if a[i] != b[i] {
			return false
		}
	}
	return true
}
