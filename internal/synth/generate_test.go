package synth

import (
	"math"
	"sort"
	"strings"
	"testing"

	"google.golang.org/protobuf/proto"

	"gonum.org/v1/gonum/num/quat"
	"gonum.org/v1/gonum/spatial/r3"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/rot"
)

func gen(t *testing.T, cfg Config) (*kinchainv1.Capture, *Truth) {
	t.Helper()
	c, tr, err := Generate(cfg)
	if err != nil {
		t.Fatal(err)
	}
	return c, tr
}

func trackOf(c *kinchainv1.Capture, s kinchainv1.Segment) *kinchainv1.Track {
	for _, tk := range c.Tracks {
		if tk.Segment == s {
			return tk
		}
	}
	return nil
}

func sampleQ(tk *kinchainv1.Track, i int) quat.Number {
	return quat.Number{Real: tk.Qw[i], Imag: tk.Qx[i], Jmag: tk.Qy[i], Kmag: tk.Qz[i]}
}

// Equal configs give identical captures; another seed gives another.
func TestDeterministicPerSeed(t *testing.T) {
	cfg := Config{Seed: 42, NoiseDeg: 0.3, JitterMs: 0.1, Dropouts: 3, MountingDeg: 10, IMU: true,
		GyroNoise: 0.01, AccelNoise: 0.1, SwingVariation: 0.05, Swings: 2, HemisphereFlips: true}
	a, _ := gen(t, cfg)
	b, _ := gen(t, cfg)
	if !proto.Equal(a, b) {
		t.Fatal("same seed, different captures")
	}
	cfg.Seed = 43
	c, _ := gen(t, cfg)
	if proto.Equal(a, c) {
		t.Fatal("different seeds, same capture")
	}
}

// The default capture: all ten segments at 1000 Hz, unit quaternions equal
// to the model's orientations, nothing else.
func TestDefaultCapture(t *testing.T) {
	c, tr := gen(t, Config{})
	if len(c.Tracks) != 10 || c.Handedness != kinchainv1.Handedness_HANDEDNESS_RIGHT || c.TargetHeadingDeg != nil {
		t.Fatalf("tracks %d, handedness %v, target %v", len(c.Tracks), c.Handedness, c.TargetHeadingDeg)
	}
	for _, tk := range c.Tracks {
		if len(tk.Gx) != 0 || len(tk.Ax) != 0 || len(tk.Mx) != 0 || tk.Mounting != nil {
			t.Fatalf("%v: unexpected columns", tk.Segment)
		}
		n := len(tk.TimeS)
		if want := int(math.Floor(tr.Model.End()*1000+1e-9)) + 1; n != want {
			t.Fatalf("%v: %d samples, want %d", tk.Segment, n, want)
		}
		for i := 0; i < n; i += 97 {
			if math.Abs(tk.TimeS[i]-float64(i)/1000) > 1e-12 {
				t.Fatalf("%v: sample %d at %g s", tk.Segment, i, tk.TimeS[i])
			}
			q := sampleQ(tk, i)
			if want := tr.Model.Orientation(tk.Segment, tk.TimeS[i]); rot.Dot(q, want) < 1-1e-12 {
				t.Fatalf("%v sample %d differs from the model", tk.Segment, i)
			}
		}
	}
}

// Every switch shows in the capture.
func TestOptionsPresent(t *testing.T) {
	c, tr := gen(t, Config{
		Seed: 7, SegmentRates: map[kinchainv1.Segment]float64{pelvis: 200, club: 500},
		Segments: []kinchainv1.Segment{pelvis, thorax, leadArm, club}, Dropouts: 4, DropoutMs: 30,
		JitterMs: 0.2, MountingDeg: 25, IMU: true, Magnetometer: true, RecordTargetHeading: true, TargetHeadingDeg: 33,
		StartTime: 100,
	})
	if len(c.Tracks) != 4 || trackOf(c, head) != nil {
		t.Fatalf("segment subset not respected: %d tracks", len(c.Tracks))
	}
	if c.TargetHeadingDeg == nil || *c.TargetHeadingDeg != 33 {
		t.Fatal("target heading not recorded")
	}
	if r := rate(trackOf(c, pelvis)); math.Abs(r-200) > 2 {
		t.Fatalf("pelvis at %g Hz, want 200", r)
	}
	if r := rate(trackOf(c, club)); math.Abs(r-500) > 5 {
		t.Fatalf("club at %g Hz, want 500", r)
	}
	if r := rate(trackOf(c, thorax)); math.Abs(r-1000) > 10 {
		t.Fatalf("thorax at %g Hz, want 1000", r)
	}
	// Jitter: the intervals vary.
	tk := trackOf(c, thorax)
	varies := false
	for i := 1; i < len(tk.TimeS); i++ {
		d := tk.TimeS[i] - tk.TimeS[i-1]
		if d <= 0 {
			t.Fatalf("times not increasing at %d", i)
		}
		if math.Abs(d-1e-3) > 1e-5 {
			varies = true
		}
	}
	if !varies || tk.TimeS[0] < 99.999 {
		t.Fatal("no jitter or wrong start time")
	}
	// Dropouts: no samples inside any gap.
	if len(tr.Gaps) != 4 {
		t.Fatalf("%d gaps, want 4", len(tr.Gaps))
	}
	for _, g := range tr.Gaps {
		tk := trackOf(c, g.Segment)
		for _, tt := range tk.TimeS {
			if tt > g.Start && tt < g.End {
				t.Fatalf("%v: sample at %g inside the gap %v", g.Segment, tt, g)
			}
		}
		if math.Abs(g.End-g.Start-0.030) > 1e-12 {
			t.Fatalf("gap length %g", g.End-g.Start)
		}
	}
	m := tr.Model
	for _, tk := range c.Tracks {
		mt := tk.Mounting
		if mt == nil {
			t.Fatalf("%v: no mounting", tk.Segment)
		}
		mq := quat.Number{Real: mt.W, Imag: mt.X, Jmag: mt.Y, Kmag: mt.Z}
		if ang := rot.Angle(rot.Identity, mq); math.Abs(deg(ang)-25) > 1e-6 {
			t.Fatalf("%v: mounting %g°, want 25°", tk.Segment, deg(ang))
		}
		if len(tk.Gx) != len(tk.TimeS) || len(tk.Ax) != len(tk.TimeS) || len(tk.Mx) != len(tk.TimeS) {
			t.Fatalf("%v: IMU columns missing", tk.Segment)
		}
		for i := 0; i < len(tk.TimeS); i += 53 {
			tt := tk.TimeS[i]
			qs := sampleQ(tk, i)
			// q_segment = q_sensor ⊗ m*.
			if seg := rot.Mul(qs, rot.Conj(mq)); rot.Dot(seg, m.Orientation(tk.Segment, tt)) < 1-1e-12 {
				t.Fatalf("%v: sensor ⊗ mounting* is not the segment orientation", tk.Segment)
			}
			// Ideal gyroscope: ω in the sensor frame.
			g := r3.Vec{X: tk.Gx[i], Y: tk.Gy[i], Z: tk.Gz[i]}
			if r3.Norm(r3.Sub(rot.Rotate(qs, g), m.Omega(tk.Segment, tt))) > 1e-9 {
				t.Fatalf("%v: gyroscope is not ω in the sensor frame", tk.Segment)
			}
			a := r3.Vec{X: tk.Ax[i], Y: tk.Ay[i], Z: tk.Az[i]}
			if r3.Norm(r3.Sub(rot.Rotate(qs, a), m.SpecificForce(tk.Segment, tt))) > 1e-9 {
				t.Fatalf("%v: accelerometer is not the specific force", tk.Segment)
			}
		}
		// At rest the accelerometer reads +1 g up.
		a := r3.Vec{X: tk.Ax[0], Y: tk.Ay[0], Z: tk.Az[0]}
		if up := rot.Rotate(sampleQ(tk, 0), a); math.Abs(up.Z-Gravity) > 1e-9 || math.Hypot(up.X, up.Y) > 1e-9 {
			t.Fatalf("%v: at rest reads %v in the world", tk.Segment, up)
		}
	}
}

// rate returns 1 / the median sample interval, Hz.
func rate(tk *kinchainv1.Track) float64 {
	d := make([]float64, len(tk.TimeS)-1)
	for i := range d {
		d[i] = tk.TimeS[i+1] - tk.TimeS[i]
	}
	sort.Float64s(d)
	return 1 / d[len(d)/2]
}

// The fault switches change the truth as documented.
func TestFaults(t *testing.T) {
	_, def := gen(t, Config{})
	_, late := gen(t, Config{LateThorax: true})
	_, early := gen(t, Config{EarlyRelease: true})
	d, l, e := def.Swings[0], late.Swings[0], early.Swings[0]
	if !d.ProximalToDistal {
		t.Fatal("default model not proximal to distal")
	}
	if l.ProximalToDistal || !(l.Peaks[thorax].TimeS > l.Peaks[leadArm].TimeS) {
		t.Fatalf("late thorax: thorax %g s, lead arm %g s", l.Peaks[thorax].TimeS, l.Peaks[leadArm].TimeS)
	}
	if e.ProximalToDistal || !(e.Peaks[club].TimeS < e.Peaks[leadArm].TimeS && e.Peaks[club].TimeS < e.Peaks[leadHand].TimeS) {
		t.Fatalf("early release: club %g s, lead arm %g s, lead hand %g s", e.Peaks[club].TimeS, e.Peaks[leadArm].TimeS, e.Peaks[leadHand].TimeS)
	}
	decel := func(p Peak) float64 { return (p.SpeedDegPerS - p.SpeedAtImpactDegPerS) / p.SpeedDegPerS }
	if !(decel(e.Peaks[club]) > 0.02 && decel(d.Peaks[club]) < 0.01) {
		t.Fatalf("club deceleration at impact: early release %.3f, default %.3f", decel(e.Peaks[club]), decel(d.Peaks[club]))
	}
	// Waggles and half swings are listed for rejection, before the swings.
	_, mv := gen(t, Config{Waggles: 2, HalfSwings: 1, Swings: 2})
	if len(mv.Rejected) != 3 || mv.Rejected[0].Kind != "waggle" || mv.Rejected[2].Kind != "half swing" || len(mv.Swings) != 2 {
		t.Fatalf("rejected %+v, %d swings", mv.Rejected, len(mv.Swings))
	}
	if !(mv.Rejected[2].End < mv.Swings[0].Address && mv.Swings[0].Finish < mv.Swings[1].Address) {
		t.Fatal("movements overlap")
	}
	if a := mv.Rejected[2].ClubAmplitudeDeg; !(a > 60 && a < 130) {
		t.Fatalf("half swing club amplitude %g°", a)
	}
	// Tempo and downswing time.
	_, tp := gen(t, Config{Tempo: 2, Downswing: 0.3})
	if st := tp.Swings[0]; math.Abs(st.Tempo.Ratio-2) > 1e-12 || math.Abs(st.Impact-st.Top-0.3) > 1e-12 {
		t.Fatalf("tempo %+v", st.Tempo)
	}
	// Orientation noise: samples scatter around the model by about the
	// requested angle (the angle of a rotation with three N(0, σ²)
	// components has rms σ√3).
	c, tr := gen(t, Config{NoiseDeg: 0.5, Segments: []kinchainv1.Segment{pelvis, club}})
	tk := trackOf(c, club)
	var ss float64
	for i := range tk.TimeS {
		ang := rot.Angle(sampleQ(tk, i), tr.Model.Orientation(club, tk.TimeS[i]))
		ss += ang * ang
	}
	if rms := deg(math.Sqrt(ss / float64(len(tk.TimeS)))); math.Abs(rms-0.5*math.Sqrt(3)) > 0.05 {
		t.Fatalf("noise rms %g°, want %g°", rms, 0.5*math.Sqrt(3))
	}
}

// Bad configurations are refused with the field named.
func TestConfigErrors(t *testing.T) {
	for _, tc := range []struct {
		cfg   Config
		field string
	}{
		{Config{Rate: -5}, "Rate"},
		{Config{Rate: 1e6}, "Rate"},
		{Config{Tempo: 0.5}, "Tempo"},
		{Config{Downswing: 2}, "Downswing"},
		{Config{ThoraxFlexionDeg: -10}, "ThoraxFlexionDeg"},
		{Config{Swings: 100}, "Swings"},
		{Config{JitterMs: math.NaN()}, "JitterMs"},
		{Config{NoiseDeg: -1}, "NoiseDeg"},
		{Config{Segments: []kinchainv1.Segment{pelvis, pelvis}}, "Segments[1]"},
		{Config{Segments: []kinchainv1.Segment{99}}, "Segments[0]"},
		{Config{Segments: []kinchainv1.Segment{}}, "Segments"},
		{Config{SegmentRates: map[kinchainv1.Segment]float64{club: 1}}, "SegmentRates"},
		{Config{Handedness: 7}, "Handedness"},
		{Config{OmitQuaternions: true}, "OmitQuaternions"},
		{Config{Duration: 1}, "Duration"},
		{Config{TargetHeadingDeg: math.Inf(1)}, "TargetHeadingDeg"},
	} {
		_, _, err := Generate(tc.cfg)
		if err == nil || !strings.Contains(err.Error(), "Config."+tc.field) {
			t.Errorf("%+v: error %v, want one naming Config.%s", tc.cfg, err, tc.field)
		}
	}
}
