package fusion

import (
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/spatial/r3"

	"github.com/kinchain/kinchain/internal/rot"
)

// Reference: scipy.signal.butter(2, fc, fs=1/ts) and
// scipy.signal.lfilter_zi(b, a) with fc = √2/(2π·tau), computed with
// Debian's python3-scipy 1.10.1:
//
//	/usr/bin/python3 -c "import numpy as np; from scipy import signal
//	for tau, ts in [(3.0, 0.0035), (0.5, 0.001), (0.05, 0.01)]:
//	    b, a = signal.butter(2, np.sqrt(2)/(2*np.pi)/tau, fs=1/ts)
//	    print(tau, ts, list(b), list(a), list(signal.lfilter_zi(b, a)))"
func TestButterworthAgainstScipy(t *testing.T) {
	cases := []struct {
		tau, ts float64
		b       [3]float64
		a       [2]float64 // a1, a2
		zi      [2]float64
	}{
		{3.0, 0.0035, [3]float64{6.797623454603904e-07, 1.3595246909207808e-06, 6.797623454603904e-07}, [2]float64{-1.9976666677234585, 0.9976693867728402}, [2]float64{0.9999993202347904, -0.9976687070076373}},
		{0.5, 0.001, [3]float64{1.99600665867236e-06, 3.99201331734472e-06, 1.99600665867236e-06}, [2]float64{-1.996000005317363, 0.9960079893439977}, [2]float64{0.9999980039991464, -0.9960059933431209}},
		{0.05, 0.01, [3]float64{0.016592576612470305, 0.03318515322494061, 0.016592576612470305}, [2]float64{-1.60399346027035, 0.6703637667202313}, [2]float64{0.9834074233875283, -0.6537711901077601}},
	}
	rel := func(got, want float64) bool { return math.Abs(got-want) <= 1e-9*math.Abs(want)+1e-15 }
	for _, c := range cases {
		f := butterworth(c.tau, c.ts)
		got := [5]float64{f.b0, f.b1, f.b2, f.a1, f.a2}
		want := [5]float64{c.b[0], c.b[1], c.b[2], c.a[0], c.a[1]}
		for i := range got {
			if !rel(got[i], want[i]) {
				t.Errorf("tau %g ts %g: coefficient %d = %.17g, scipy %.17g", c.tau, c.ts, i, got[i], want[i])
			}
		}
		// Steady-state start: the state after the averaging phase equals
		// lfilter_zi times the input level.
		var st lpState
		x := []float64{2.5, -1}
		out := make([]float64, 2)
		for k := 0; st.count*c.ts < c.tau; k++ {
			st.filter(&f, x, out)
		}
		for i, lv := range x {
			if !rel(st.s[i][0], c.zi[0]*lv) || !rel(st.s[i][1], c.zi[1]*lv) {
				t.Errorf("tau %g: initial state %v, scipy %v·%g", c.tau, st.s[i], c.zi, lv)
			}
		}
		// A constant input then stays constant (DC gain 1).
		for k := 0; k < 1000; k++ {
			st.filter(&f, x, out)
		}
		if math.Abs(out[0]-2.5) > 1e-9 || math.Abs(out[1]+1) > 1e-9 {
			t.Errorf("tau %g: constant input drifted to %v", c.tau, out)
		}
	}
}

// Closed form: k = 1 − exp(−ts/tau) is the exact discretisation of a
// first-order lag; its special cases per the doc comment.
func TestGainFromTau(t *testing.T) {
	if k := gainFromTau(9, 0.01); math.Abs(k-(1-math.Exp(-0.01/9))) > 1e-15 {
		t.Errorf("gain %g", k)
	}
	if gainFromTau(0, 0.01) != 1 || gainFromTau(-1, 0.01) != 0 {
		t.Errorf("special cases wrong")
	}
}

// A still sensor in a known pose, 9D: after convergence the estimate maps
// the accelerometer reading onto world +z and the horizontal field onto
// world +y (VQF's frame: x magnetic east, y magnetic north, z up). The
// truth is the pose itself, within the noise (closed form).
func TestStillPose9DFrame(t *testing.T) {
	truth := rot.FromEuler(rot.ZYX, 2.2, -0.5, 0.8)
	acc := rot.InvRotate(truth, r3.Vec{Z: 9.81})
	mag := rot.InvRotate(truth, fieldENU)
	f := New(Params{}, 0.005)
	r := rand.New(rand.NewPCG(1, 1))
	for i := 0; i < 4000; i++ {
		n := r3.Vec{X: 0.002 * r.NormFloat64(), Y: 0.002 * r.NormFloat64(), Z: 0.002 * r.NormFloat64()}
		f.Update(n, acc, mag)
	}
	if e := rot.Angle(f.Quat(), truth); e > 0.2*deg {
		t.Fatalf("still pose error %.3f°", e/deg)
	}
	if up := rot.Rotate(f.Quat(), r3.Unit(acc)); math.Abs(up.Z-1) > 1e-4 {
		t.Fatalf("gravity maps to %v, want +z", up)
	}
	if m := rot.Rotate(f.Quat(), mag); math.Abs(m.X) > 0.1 || m.Y < 19.9 {
		t.Fatalf("field maps to %v, want (0, 20, −44)", m)
	}
	// 6D keeps the inclination but not the heading.
	e := rot.Mul(f.Quat6D(), rot.Conj(truth))
	if inc := 2 * math.Acos(math.Min(1, math.Hypot(e.Real, e.Kmag))); inc > 0.2*deg {
		t.Fatalf("6D inclination error %.3f°", inc/deg)
	}
	if !f.Rest() {
		t.Fatalf("still sensor not detected at rest")
	}
}

// A disturbed field (an offset that changes norm by −17 %, dip by −29° and
// heading by 51°) is detected and rejected: heading holds, while with
// rejection disabled it follows the disturbance (Laidig & Seel 2023,
// Sec. 3.6, the behaviour the paper describes; thresholds MagNormTh 10 %,
// MagDipTh 10°).
func TestMagneticDisturbanceRejection(t *testing.T) {
	const rate = 100.0
	disturb := r3.Vec{X: 25, Z: 20}
	run := func(p Params) (worst float64, disturbedFrac float64) {
		f := New(p, 1/rate)
		var dist, in int
		for i := 0; i < int(40*rate); i++ {
			tt := float64(i) / rate
			// Turning at 40 °/s about z with a slow wobble.
			ang := [3]float64{40 * deg * tt, 0.3 * math.Sin(0.5*tt), 0.2 * math.Sin(0.7*tt)}
			rate3 := [3]float64{40 * deg, 0.15 * math.Cos(0.5*tt), 0.14 * math.Cos(0.7*tt)}
			truth := rot.FromEuler(rot.ZYX, ang[0], ang[1], ang[2])
			qx := rot.FromEuler(rot.ZYX, 0, 0, ang[2])
			qyx := rot.FromEuler(rot.ZYX, 0, ang[1], ang[2])
			w := r3.Add(r3.Add(rot.InvRotate(qyx, r3.Vec{Z: rate3[0]}), rot.InvRotate(qx, r3.Vec{Y: rate3[1]})), r3.Vec{X: rate3[2]})
			field := fieldENU
			disturbed := tt >= 20 && tt < 30
			if disturbed {
				field = r3.Add(field, disturb)
			}
			f.Update(w, rot.InvRotate(truth, r3.Vec{Z: 9.81}), rot.InvRotate(truth, field))
			if disturbed {
				in++
				if f.MagDisturbed() {
					dist++
				}
				worst = math.Max(worst, rot.Angle(f.Quat(), truth))
			}
		}
		return worst, float64(dist) / float64(in)
	}
	worst, frac := run(Params{})
	if worst > 1*deg || frac < 0.95 {
		t.Errorf("with rejection: worst heading error %.2f° (want ≤ 1°), disturbed flagged %.0f %% (want ≥ 95 %%)", worst/deg, 100*frac)
	}
	worstOff, _ := run(Params{NoMagDistRejection: true})
	if worstOff < 20*deg {
		t.Errorf("without rejection the disturbance should pull heading (>20°), got %.2f°", worstOff/deg)
	}
	t.Logf("worst error during disturbance: %.2f° with rejection, %.2f° without", worst/deg, worstOff/deg)
}

// Update allocates nothing (issue: zero allocations per sample).
func TestUpdateAllocs(t *testing.T) {
	gyr, acc, mag := benchReadings(64)
	f := New(Params{}, 0.001)
	i := 0
	allocs := testing.AllocsPerRun(1000, func() {
		f.Update(gyr[i&63], acc[i&63], mag[i&63])
		_ = f.Quat()
		i++
	})
	if allocs != 0 {
		t.Fatalf("%v allocations per Update", allocs)
	}
}

// Reset returns to the initial state; SetBias and Bias round-trip.
func TestResetAndBias(t *testing.T) {
	gyr, acc, mag := benchReadings(500)
	f := New(Params{}, 0.001)
	for i := range gyr {
		f.Update(gyr[i], acc[i], mag[i])
	}
	f.Reset()
	if f.Quat() != rot.Identity || f.Delta() != 0 || f.Rest() || !f.MagDisturbed() {
		t.Fatalf("Reset left state behind")
	}
	if _, s := f.Bias(); math.Abs(s-0.5*deg) > 1e-12 {
		t.Fatalf("initial bias σ %g °/s, want 0.5", s/deg)
	}
	f.SetBias(r3.Vec{X: 0.01}, 0.1*deg)
	if b, s := f.Bias(); b.X != 0.01 || math.Abs(s-0.1*deg) > 1e-12 {
		t.Fatalf("Bias after SetBias: %v, %g", b, s)
	}
	if p := f.Params(); p.TauAcc != 3 || p.TauMag != 9 || p.RestMinT != 1.5 {
		t.Fatalf("defaults not filled: %+v", p)
	}
}

// New rejects a sample interval that is not positive and finite.
func TestNewPanicsOnBadInterval(t *testing.T) {
	for _, dt := range []float64{0, -0.01, math.NaN(), math.Inf(1)} {
		func() {
			defer func() {
				if recover() == nil {
					t.Errorf("New(…, %v) did not panic", dt)
				}
			}()
			New(Params{}, dt)
		}()
	}
}

// Switches and the unfiltered disturbance detector (MagCurrentTau < 0)
// still give finite orientations.
func TestParamVariants(t *testing.T) {
	gyr, acc, mag := benchReadings(3000)
	for _, p := range []Params{
		{MagCurrentTau: -1},
		{NoMotionBiasEst: true},
		{NoRestBiasEst: true, NoMagDistRejection: true},
		{NoMotionBiasEst: true, NoRestBiasEst: true},
		{TauMag: -1},
	} {
		f := New(p, 0.001)
		for i := range gyr {
			f.Update(gyr[i], acc[i], mag[i])
		}
		q := f.Quat()
		if math.IsNaN(q.Real) || math.Abs(rot.Norm(q)-1) > 1e-12 {
			t.Errorf("%+v: quaternion %v", p, q)
		}
		if b, _ := f.Bias(); (p.NoMotionBiasEst && p.NoRestBiasEst) && b != (r3.Vec{}) {
			t.Errorf("bias estimated with estimation off: %v", b)
		}
	}
}
