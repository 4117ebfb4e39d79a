package condition

import (
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/num/quat"
	"gonum.org/v1/gonum/spatial/r3"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/capture"
	"github.com/kinchain/kinchain/internal/rot"
)

// Reference: Markley et al. 2007 (J. Guid. Control Dyn. 30(4)), properties
// of the eigenvector mean: for rotations placed symmetrically about a centre
// (c ⊗ exp(±v/2) pairs) the mean is the centre; the result does not depend
// on the signs of the inputs; and it minimises the chordal cost
// Σ (1 − (q̄·qᵢ)²) (no nearby rotation does better).
func TestMeanOrientation(t *testing.T) {
	r := rand.New(rand.NewPCG(41, 42))
	for trial := 0; trial < 50; trial++ {
		c := randUnit(r)
		var q []quat.Number
		for k := 0; k < 6; k++ {
			v := r3.Scale(0.5*r.Float64(), randVec(r))
			q = append(q, rot.Mul(c, rot.FromRotVec(v)), rot.Mul(c, rot.FromRotVec(r3.Scale(-1, v))))
		}
		for i := range q {
			if r.IntN(2) == 0 {
				q[i] = rot.Neg(q[i])
			}
		}
		m, ok := MeanOrientation(q)
		if !ok {
			t.Fatal("no mean")
		}
		if d := angle(m, c); d > 1e-12 {
			t.Fatalf("mean %g rad from the centre", d)
		}
		if rot.Dot(m, q[0]) < 0 {
			t.Fatalf("mean not in q[0]'s hemisphere")
		}
		cost := func(x quat.Number) float64 {
			s := 0.0
			for _, y := range q {
				d := rot.Dot(x, y)
				s += 1 - d*d
			}
			return s
		}
		// Optimality with asymmetric inputs.
		q = append(q, rot.Mul(c, rot.FromRotVec(r3.Scale(0.3, randVec(r)))))
		m, _ = MeanOrientation(q)
		for k := 0; k < 20; k++ {
			p := rot.Mul(m, rot.FromRotVec(r3.Scale(1e-3, randVec(r))))
			if cost(p) < cost(m)-1e-15 {
				t.Fatalf("a perturbed rotation has lower cost: %g < %g", cost(p), cost(m))
			}
		}
	}
	if _, ok := MeanOrientation(nil); ok {
		t.Error("mean of nothing")
	}
}

// Reference: the definition of continuity (neighbouring quaternions in one
// hemisphere) and q ≡ −q (the same rotation, gonum-checked rot.Rotate):
// every sign change put into a smooth sequence is undone and counted.
func TestContinuity(t *testing.T) {
	r := rand.New(rand.NewPCG(43, 44))
	s := spin{randUnit(r), r3.Vec{X: 0, Y: 0, Z: 7}}
	q := make([]quat.Number, 500)
	orig := make([]quat.Number, 500)
	for i := range q {
		orig[i] = s.at(float64(i) / 100)
		q[i] = orig[i]
	}
	// Negate runs of 13 samples: Continuity fixes in place, so every
	// negated sample is negated back, one flip each.
	want := 0
	for i := 50; i < 480; i += 40 {
		for j := i; j < i+13; j++ {
			q[j] = rot.Neg(q[j])
			want++
		}
	}
	if got := continuityFlips(q); got != want {
		t.Errorf("continuityFlips %d, want %d", got, want)
	}
	if got := Continuity(q); got != want {
		t.Errorf("flips %d, want %d", got, want)
	}
	v := r3.Vec{X: 0.3, Y: -1, Z: 2}
	for i := range q {
		if i > 0 && rot.Dot(q[i-1], q[i]) < 0 {
			t.Fatalf("sample %d still discontinuous", i)
		}
		if r3.Norm(r3.Sub(rot.Rotate(q[i], v), rot.Rotate(orig[i], v))) > 1e-12 {
			t.Fatalf("sample %d: rotation changed", i)
		}
	}
}

// Reference: the neutral-pose convention (DEVELOPERS.md: in the neutral pose
// every body segment frame equals the world frame, heading free) and the
// mounting relation q_segment = q_sensor ⊗ m*. Sensors are strapped on with
// random rotations; segments sway by up to 1° while standing, then move.
//
// A static pose fixes each sensor's mounting except for one rotation about
// the vertical, common to all segments (the player's facing in the sensors'
// world frame, which no sensor reveals unless a body segment's mounting is
// given). With the pelvis sensor's heading taken as the facing, the
// calibrated segments are q_true ⊗ Yaw(δ) for one δ, the heading of the
// pelvis sensor's x axis relative to the true facing. Every segment at every
// sample must match that within 0.5°, and δ must be that heading difference.
// When the pelvis sensor's x axis points forward (δ = 0) the truth itself is
// recovered.
func TestNeutralAlignmentRecoversSegments(t *testing.T) {
	r := rand.New(rand.NewPCG(45, 46))
	segs := []kinchainv1.Segment{thorax, pelvis, kinchainv1.Segment_SEGMENT_LEAD_UPPER_ARM, kinchainv1.Segment_SEGMENT_LEAD_HAND, club}
	const rate, n = 200.0, 800
	psi0 := 2.1 // the player's true facing in the sensors' world frame
	for _, forward := range []bool{false, true} {
		truth := make([][]quat.Number, len(segs))
		mounts := make([]quat.Number, len(segs))
		c := &capture.Capture{Neutral: &capture.Window{Start: 0, End: 1.5}}
		for k, sg := range segs {
			m := randUnit(r)
			if forward && sg == pelvis {
				// Sensor x axis pointing forward and horizontal: a mounting
				// that is a pure rotation about the sensor's x axis.
				m = rot.FromAxisAngle(r3.Vec{X: 1}, 2*math.Pi*r.Float64())
			}
			mounts[k] = m
			w := r3.Scale(3, randVec(r))
			sway := [2]r3.Vec{r3.Scale(0.01, r3.Unit(randVec(r))), r3.Scale(0.01, r3.Unit(randVec(r)))}
			tr := capture.Track{Segment: sg, Time: times(r, 0, rate, n, 0), Q: make([]quat.Number, n)}
			truth[k] = make([]quat.Number, n)
			for i, tt := range tr.Time {
				// Sway: two slow oscillations of 0.01 rad (0.6°) each.
				v := r3.Add(r3.Scale(math.Sin(2*math.Pi*0.7*tt), sway[0]), r3.Scale(math.Cos(2*math.Pi*1.1*tt), sway[1]))
				q := rot.Mul(rot.YawRotation(psi0), rot.FromRotVec(v))
				if tt > 1.6 {
					q = rot.Mul(q, rot.FromRotVec(r3.Scale(tt-1.6, w)))
				}
				truth[k][i] = q
				tr.Q[i] = rot.Mul(q, m)
			}
			c.Tracks = append(c.Tracks, tr)
		}
		res, err := Run(c, Options{})
		if err != nil {
			t.Fatal(err)
		}
		if w := hasWarningCode(res.Warnings, kinchainv1.WarningCode_WARNING_CODE_NEUTRAL_NOT_STILL); w != nil {
			t.Errorf("unexpected warning %v", w)
		}
		// δ predicted: the pelvis sensor's x-axis heading minus the facing.
		delta := rot.Heading(rot.Mul(rot.YawRotation(psi0), mounts[1])) - psi0
		if forward && math.Abs(math.Remainder(delta, 2*math.Pi)) > 1e-12 {
			t.Fatalf("test setup: forward pelvis sensor has δ = %g", delta)
		}
		yaw := rot.YawRotation(delta)
		worst := 0.0
		for k := range segs {
			seg := &res.Segments[k]
			if !seg.Calibrated {
				t.Errorf("%s not calibrated", seg.Segment)
			}
			for i := range seg.Q {
				worst = math.Max(worst, angleDeg(seg.Q[i], rot.Mul(truth[k][i], yaw)))
			}
		}
		t.Logf("forward pelvis sensor %v: worst %.4f°", forward, worst)
		if worst > 0.5 {
			t.Errorf("forward pelvis sensor %v: segments within %.3f° of the truth, want ≤ 0.5°", forward, worst)
		}
	}
}

func hasWarningCode(ws []*kinchainv1.Warning, code kinchainv1.WarningCode) *kinchainv1.Warning {
	for _, w := range ws {
		if w.GetCode() == code {
			return w
		}
	}
	return nil
}

// Reference: the Track.mounting contract (capture.proto: an explicit
// mounting takes precedence over the neutral-pose calibration) and
// NEUTRAL_NOT_STILL (analysis.proto). With the pelvis mounting given, the
// common heading is the pelvis segment's, so calibrated segments come out in
// the true world frame; a thorax turning 10° in the window is reported.
func TestExplicitMountingAndStillness(t *testing.T) {
	r := rand.New(rand.NewPCG(47, 48))
	const rate, n = 100.0, 300
	psi0 := -0.7
	mp, mt := randUnit(r), randUnit(r)
	c := &capture.Capture{Neutral: &capture.Window{Start: 0.5, End: 1.5}}
	var truthT []quat.Number
	for k, m := range []quat.Number{mp, mt} {
		tr := capture.Track{Segment: []kinchainv1.Segment{pelvis, thorax}[k], Time: times(r, 0, rate, n, 0), Q: make([]quat.Number, n)}
		for i, tt := range tr.Time {
			q := rot.YawRotation(psi0)
			if k == 1 {
				// The thorax turns 10° about the vertical during the window.
				q = rot.Mul(q, rot.YawRotation(10*math.Pi/180*math.Min(1, math.Max(0, tt-0.5))))
				truthT = append(truthT, q)
			}
			tr.Q[i] = rot.Mul(q, m)
		}
		c.Tracks = append(c.Tracks, tr)
	}
	mpScaled := quat.Scale(1, mp)
	c.Tracks[0].Mounting = &mpScaled
	res, err := Run(c, Options{})
	if err != nil {
		t.Fatal(err)
	}
	p, th := res.Segment(pelvis), res.Segment(thorax)
	if p.Calibrated || angle(p.Mounting, mp) > 1e-12 || !th.Calibrated {
		t.Fatalf("pelvis mounting %v (calibrated %v), thorax calibrated %v", p.Mounting, p.Calibrated, th.Calibrated)
	}
	for i := range p.Q {
		if d := angleDeg(p.Q[i], rot.YawRotation(psi0)); d > 1e-9 {
			t.Fatalf("pelvis sample %d: %g° from the truth", i, d)
		}
	}
	// The thorax's calibration uses its window mean (heading psi0 + 5°).
	if d := angleDeg(th.Q[0], rot.Mul(rot.YawRotation(-5*math.Pi/180), truthT[0])); d > 0.01 {
		t.Errorf("thorax: %g° from the expected calibration", d)
	}
	w := hasWarning(res.Warnings, kinchainv1.WarningCode_WARNING_CODE_NEUTRAL_NOT_STILL, thorax)
	if w == nil || w.TimeS == nil {
		t.Fatalf("no NEUTRAL_NOT_STILL warning with a time for the thorax: %v", res.Warnings)
	}
	if hasWarning(res.Warnings, kinchainv1.WarningCode_WARNING_CODE_NEUTRAL_NOT_STILL, pelvis) != nil {
		t.Errorf("NEUTRAL_NOT_STILL for the still pelvis")
	}
	// Options.Neutral overrides the capture's window: a window where the
	// thorax is still (after its turn) gives no warning.
	res, err = Run(c, Options{Neutral: &capture.Window{Start: 1.6, End: 2.5}})
	if err != nil {
		t.Fatal(err)
	}
	if w := hasWarningCode(res.Warnings, kinchainv1.WarningCode_WARNING_CODE_NEUTRAL_NOT_STILL); w != nil {
		t.Errorf("options window: %v", w)
	}
	if d := angleDeg(res.Segment(thorax).Q[299], rot.YawRotation(psi0)); d > 1e-9 {
		t.Errorf("options window: thorax at the end %g° from the pelvis heading", d)
	}
	// Without a neutral window and without mountings: sensor frame = segment frame.
	c.Neutral, c.Tracks[0].Mounting = nil, nil
	res, err = Run(c, Options{})
	if err != nil {
		t.Fatal(err)
	}
	for k := range res.Segments {
		if res.Segments[k].Mounting != rot.Identity || angle(res.Segments[k].Q[7], c.Tracks[k].Q[7]) > 1e-12 {
			t.Errorf("%s: not left in the sensor frame", res.Segments[k].Segment)
		}
	}
}
