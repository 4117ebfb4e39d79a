package fusion

import (
	"bytes"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"runtime"
	"strconv"
	"testing"

	"gonum.org/v1/gonum/num/quat"
	"gonum.org/v1/gonum/spatial/r3"

	"github.com/kinchain/kinchain/internal/capture"
	"github.com/kinchain/kinchain/internal/rot"
)

// broadTrial is one BROAD trial: raw IMU readings, the optical reference
// orientation (ENU earth frame; NaN where the markers were lost) and the
// movement-phase flag.
type broadTrial struct {
	name     string
	rate     float64
	gyr, acc []r3.Vec
	mag      []r3.Vec
	ref      []quat.Number
	movement []bool
}

// sharedData returns the directory of the shared open datasets:
// $KINCHAIN_SHARED_DATA, else ../shared/data relative to the repository
// root. It skips the test when the directory is absent, unless CI is "true".
func sharedData(t testing.TB, sub string) string {
	t.Helper()
	dir := os.Getenv("KINCHAIN_SHARED_DATA")
	if dir == "" {
		_, file, _, _ := runtime.Caller(0)
		// internal/fusion/<file> → repository root → ../shared/data
		dir = filepath.Join(filepath.Dir(file), "..", "..", "..", "shared", "data")
	}
	dir = filepath.Join(dir, sub)
	if _, err := os.Stat(dir); err != nil {
		if os.Getenv("CI") == "true" {
			t.Fatalf("shared data %s missing in CI: %v", dir, err)
		}
		t.Skipf("shared data %s absent: %v", dir, err)
	}
	return dir
}

// readBroad parses a BROAD CSV as written for this repository (see
// /work/shared/data/broad/README.md): a "# ... sampling_rate_hz: R" comment
// line, a header, then time_s, gx..gz, ax..az, mx..mz, ref_qw..ref_qz,
// movement.
func readBroad(t testing.TB, path string) *broadTrial {
	t.Helper()
	data, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	tr := &broadTrial{name: filepath.Base(path)}
	want := []string{"time_s", "gx", "gy", "gz", "ax", "ay", "az", "mx", "my", "mz", "ref_qw", "ref_qx", "ref_qy", "ref_qz", "movement"}
	var f [15]float64
	line := 0
	header := false
	for len(data) > 0 {
		i := bytes.IndexByte(data, '\n')
		var l []byte
		if i < 0 {
			l, data = data, nil
		} else {
			l, data = data[:i], data[i+1:]
		}
		line++
		l = bytes.TrimRight(l, "\r")
		if len(l) == 0 {
			continue
		}
		if l[0] == '#' {
			if j := bytes.Index(l, []byte("sampling_rate_hz:")); j >= 0 {
				tr.rate, err = strconv.ParseFloat(string(bytes.TrimSpace(l[j+len("sampling_rate_hz:"):])), 64)
				if err != nil {
					t.Fatalf("%s:%d: sampling rate: %v", path, line, err)
				}
			}
			continue
		}
		if !header {
			if got := string(l); got != joinComma(want) {
				t.Fatalf("%s:%d: header %q, want %q", path, line, got, joinComma(want))
			}
			header = true
			continue
		}
		n := 0
		for len(l) > 0 && n < len(f) {
			j := bytes.IndexByte(l, ',')
			var fld []byte
			if j < 0 {
				fld, l = l, nil
			} else {
				fld, l = l[:j], l[j+1:]
			}
			v, err := strconv.ParseFloat(string(fld), 64)
			if err != nil {
				t.Fatalf("%s:%d: %s: %v", path, line, want[n], err)
			}
			f[n] = v
			n++
		}
		if n != len(f) || len(l) != 0 {
			t.Fatalf("%s:%d: %d fields, want %d", path, line, n, len(f))
		}
		tr.gyr = append(tr.gyr, r3.Vec{X: f[1], Y: f[2], Z: f[3]})
		tr.acc = append(tr.acc, r3.Vec{X: f[4], Y: f[5], Z: f[6]})
		tr.mag = append(tr.mag, r3.Vec{X: f[7], Y: f[8], Z: f[9]})
		tr.ref = append(tr.ref, quat.Number{Real: f[10], Imag: f[11], Jmag: f[12], Kmag: f[13]})
		tr.movement = append(tr.movement, f[14] == 1)
	}
	if tr.rate <= 0 || len(tr.gyr) == 0 {
		t.Fatalf("%s: no sampling rate or no rows", path)
	}
	return tr
}

func joinComma(s []string) string {
	var b bytes.Buffer
	for i, x := range s {
		if i > 0 {
			b.WriteByte(',')
		}
		b.WriteString(x)
	}
	return b.String()
}

// broadErrors are the BROAD error measures over the movement phase, deg.
type broadErrors struct {
	total, heading, inclination float64
	offset                      float64 // removed constant heading offset, deg
	n                           int
}

func (e broadErrors) String() string {
	return fmt.Sprintf("total %.2f°, heading %.2f°, inclination %.2f° (offset %.1f°, %d samples)", e.total, e.heading, e.inclination, e.offset, e.n)
}

// evalBroad computes the BROAD error measures (Laidig et al., Data 6(7):72,
// 2021, Sec. 4; dataset README): the earth-frame error quaternion
// e = q_est ⊗ q_ref⁻¹, a constant heading offset removed (the circular mean
// of the heading error 2·atan2(e_z, e_w) over the movement phase), then the
// total error 2·acos|e_w|, heading error 2·atan2(e_z, e_w) and inclination
// error 2·acos√(e_w² + e_z²), as RMS over movement-phase samples whose
// reference is not NaN.
func evalBroad(tr *broadTrial, est []quat.Number) broadErrors {
	var sx, sy float64
	use := func(i int) bool { return tr.movement[i] && !math.IsNaN(tr.ref[i].Real) }
	errq := func(i int) quat.Number { return rot.Mul(est[i], rot.Conj(tr.ref[i])) }
	for i := range est {
		if !use(i) {
			continue
		}
		e := errq(i)
		h := 2 * math.Atan2(e.Kmag, e.Real)
		sx += math.Cos(h)
		sy += math.Sin(h)
	}
	off := math.Atan2(sy, sx)
	fix := rot.YawRotation(-off)
	var r broadErrors
	var st, sh, si float64
	for i := range est {
		if !use(i) {
			continue
		}
		e := rot.Mul(fix, errq(i))
		if e.Real < 0 {
			e = rot.Neg(e)
		}
		tot := 2 * math.Acos(math.Min(1, math.Abs(e.Real)))
		head := wrapPi(2 * math.Atan2(e.Kmag, e.Real))
		inc := 2 * math.Acos(math.Min(1, math.Sqrt(e.Real*e.Real+e.Kmag*e.Kmag)))
		st += tot * tot
		sh += head * head
		si += inc * inc
		r.n++
	}
	n := float64(r.n)
	r.total = math.Sqrt(st/n) / deg
	r.heading = math.Sqrt(sh/n) / deg
	r.inclination = math.Sqrt(si/n) / deg
	r.offset = off / deg
	return r
}

// runVQF fuses a BROAD trial sample by sample.
func runVQF(tr *broadTrial, p Params, useMag bool) []quat.Number {
	f := New(p, 1/tr.rate)
	out := make([]quat.Number, len(tr.gyr))
	for i := range tr.gyr {
		var m r3.Vec
		if useMag {
			m = tr.mag[i]
		}
		f.Update(tr.gyr[i], tr.acc[i], m)
		out[i] = f.Quat()
	}
	return out
}

// runBaseline fuses a BROAD trial with a Madgwick or Mahony filter.
func runBaseline(tr *broadTrial, f interface {
	Update(gyr, acc, mag r3.Vec)
	Quat() quat.Number
}) []quat.Number {
	out := make([]quat.Number, len(tr.gyr))
	for i := range tr.gyr {
		f.Update(tr.gyr[i], tr.acc[i], tr.mag[i])
		out[i] = f.Quat()
	}
	return out
}

// TestBROAD checks VQF against the optical reference of the BROAD benchmark
// (Laidig, Caruso, Cereatti & Seel, Data 6(7):72, 2021), trials 07 and 24.
//
// Targets (issue text): 9D total RMSE ≤ 2.0° on 07_undisturbed_fast_rotation_B
// and ≤ 1.5° on 24_disturbed_tapping_A. The 6D inclination bound 2° and the
// 9D heading and inclination bounds are what this implementation measured
// (see DEVELOPERS.md, "Fusion") with margin.
//
// The evaluation itself is checked against figures from outside: the issue
// gives the total RMSE of the npm package ahrs 1.3.3 on these trials —
// Madgwick (β = 0.1) 3.1° and 1.7°, Mahony (kp = 1) 2.5° and 2.1° — which
// our sample-for-sample ports of those filters (TestBaselinesAgainstAhrs),
// started from the first sample as ahrs' doInitialisation does, must
// reproduce to the quoted precision (±0.05°).
func TestBROAD(t *testing.T) {
	dir := sharedData(t, "broad")
	cases := []struct {
		file             string
		maxTotal9D       float64
		maxHeading9D     float64
		maxInclination9D float64
		maxInclination6D float64
		madgwick, mahony float64 // issue figures, total RMSE, deg
	}{
		{"07_undisturbed_fast_rotation_B.csv", 2.0, 2.0, 1.5, 1.5, 3.1, 2.5},
		{"24_disturbed_tapping_A.csv", 1.5, 1.5, 1.0, 1.0, 1.7, 2.1},
	}
	for _, c := range cases {
		t.Run(c.file, func(t *testing.T) {
			tr := readBroad(t, filepath.Join(dir, c.file))
			e9 := evalBroad(tr, runVQF(tr, Params{}, true))
			e6 := evalBroad(tr, runVQF(tr, Params{}, false))
			dt := 1 / tr.rate
			mw := evalBroad(tr, runBaseline(tr, NewMadgwick(0.1, dt, true)))
			mh := evalBroad(tr, runBaseline(tr, NewMahony(1, 0, dt, true)))
			// The same through Track (priming, per-interval integration).
			ct := capture.Track{Time: make([]float64, len(tr.gyr)), Gyro: tr.gyr, Accel: tr.acc, Mag: tr.mag}
			for i := range ct.Time {
				ct.Time[i] = float64(i) / tr.rate
			}
			rep, err := Track(&ct, Options{})
			if err != nil {
				t.Fatal(err)
			}
			et := evalBroad(tr, ct.Q)
			t.Logf("VQF 9D:      %v", e9)
			t.Logf("Track 9D:    %v (primed from %.1f s)", et, rep.PrimedSpan)
			if et.total > c.maxTotal9D {
				t.Errorf("Track 9D total RMSE %.2f° > %.2f°", et.total, c.maxTotal9D)
			}
			t.Logf("VQF 6D:      %v", e6)
			t.Logf("Madgwick 9D: %v", mw)
			t.Logf("Mahony 9D:   %v", mh)
			t.Logf("total RMSE ratio VQF/Madgwick %.2f, VQF/Mahony %.2f", e9.total/mw.total, e9.total/mh.total)
			if e9.total > c.maxTotal9D {
				t.Errorf("9D total RMSE %.2f° > %.2f°", e9.total, c.maxTotal9D)
			}
			if e9.heading > c.maxHeading9D {
				t.Errorf("9D heading RMSE %.2f° > %.2f°", e9.heading, c.maxHeading9D)
			}
			if e9.inclination > c.maxInclination9D {
				t.Errorf("9D inclination RMSE %.2f° > %.2f°", e9.inclination, c.maxInclination9D)
			}
			if e6.inclination > c.maxInclination6D {
				t.Errorf("6D inclination RMSE %.2f° > %.2f°", e6.inclination, c.maxInclination6D)
			}
			if math.Abs(mw.total-c.madgwick) > 0.05 || math.Abs(mh.total-c.mahony) > 0.05 {
				t.Errorf("evaluation does not reproduce the ahrs 1.3.3 figures: Madgwick %.2f° (issue %.1f°), Mahony %.2f° (issue %.1f°)", mw.total, c.madgwick, mh.total, c.mahony)
			}
		})
	}
}
