package synth

import (
	"fmt"
	"math"
	"math/rand/v2"
	"sort"

	"gonum.org/v1/gonum/num/quat"
	"gonum.org/v1/gonum/spatial/r3"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/rot"
)

// magneticField is the uniform field of the magnetometer model in the
// world frame, µT (an invented mid-latitude field: 22 µT horizontal along
// world +x, 40 µT down).
var magneticField = r3.Vec{X: 22, Z: -40}

// Generate samples the model golfer described by cfg and returns the
// capture and its ground truth.
func Generate(cfg Config) (*kinchainv1.Capture, *Truth, error) {
	m, err := NewModel(cfg)
	if err != nil {
		return nil, nil, err
	}
	c := m.cfg
	rng := rand.New(rand.NewPCG(uint64(c.Seed), 0xca97))
	tr := m.truth()

	capt := &kinchainv1.Capture{
		CaptureId:  fmt.Sprintf("synth-%d", c.Seed),
		Handedness: c.Handedness,
		Club:       "7-iron (model)",
		Metadata: map[string]string{
			"generator": "kinchain synth: the model golfer",
			"seed":      fmt.Sprint(c.Seed),
		},
	}
	if c.RecordTargetHeading {
		h := c.TargetHeadingDeg
		capt.TargetHeadingDeg = &h
	}
	if c.MountingDeg > 0 {
		tr.Mountings = map[kinchainv1.Segment]quat.Number{}
	}
	for _, s := range c.Segments {
		tk, mount := m.track(s, rng)
		if c.MountingDeg > 0 {
			tr.Mountings[s] = mount
		}
		capt.Tracks = append(capt.Tracks, tk)
	}
	for i := 0; i < c.Dropouts; i++ {
		k := rng.IntN(len(capt.Tracks))
		tk := capt.Tracks[k]
		length := c.DropoutMs / 1000
		lo, hi := c.StartTime+0.1, m.end-0.1-length
		if hi <= lo {
			return nil, nil, fmt.Errorf("synth: Config.DropoutMs = %g: longer than the capture allows", c.DropoutMs)
		}
		start := lo + rng.Float64()*(hi-lo)
		g := GapTruth{Segment: tk.Segment, Start: start, End: start + length}
		cut(tk, g.Start, g.End)
		tr.Gaps = append(tr.Gaps, g)
	}
	sort.Slice(tr.Gaps, func(i, j int) bool { return tr.Gaps[i].Start < tr.Gaps[j].Start })
	return capt, tr, nil
}

// track samples segment s.
func (m *Model) track(s kinchainv1.Segment, rng *rand.Rand) (*kinchainv1.Track, quat.Number) {
	c := &m.cfg
	rate := c.rate(s)
	n := int(math.Floor((m.end-c.StartTime)*rate+1e-9)) + 1
	tk := &kinchainv1.Track{Segment: s, TimeS: make([]float64, n)}
	mount := rot.Identity
	if c.MountingDeg > 0 {
		axis := r3.Vec{X: rng.NormFloat64(), Y: rng.NormFloat64(), Z: rng.NormFloat64()}
		mount = rot.FromAxisAngle(axis, rad(c.MountingDeg))
		tk.Mounting = &kinchainv1.Quaternion{W: mount.Real, X: mount.Imag, Y: mount.Jmag, Z: mount.Kmag}
	}
	if !c.OmitQuaternions {
		tk.Qw, tk.Qx, tk.Qy, tk.Qz = make([]float64, n), make([]float64, n), make([]float64, n), make([]float64, n)
	}
	var gb, ab r3.Vec
	if c.IMU {
		tk.Gx, tk.Gy, tk.Gz = make([]float64, n), make([]float64, n), make([]float64, n)
		tk.Ax, tk.Ay, tk.Az = make([]float64, n), make([]float64, n), make([]float64, n)
		gb = randomVec(rng, c.GyroBias)
		ab = randomVec(rng, c.AccelBias)
	}
	if c.Magnetometer {
		tk.Mx, tk.My, tk.Mz = make([]float64, n), make([]float64, n), make([]float64, n)
	}
	jit := c.JitterMs / 1000
	limit := 0.4 / rate
	noise := rad(c.NoiseDeg)
	for i := 0; i < n; i++ {
		t := c.StartTime + float64(i)/rate
		if jit > 0 {
			t += math.Max(-limit, math.Min(limit, jit*rng.NormFloat64()))
		}
		t = math.Min(t, m.end)
		if i > 0 && t <= tk.TimeS[i-1] {
			t = math.Nextafter(tk.TimeS[i-1], math.Inf(1))
		}
		tk.TimeS[i] = t
		qs := rot.Mul(m.Orientation(s, t), mount)
		if !c.OmitQuaternions {
			q := qs
			if noise > 0 {
				q = rot.Mul(q, rot.FromRotVec(r3.Vec{X: noise * rng.NormFloat64(), Y: noise * rng.NormFloat64(), Z: noise * rng.NormFloat64()}))
			}
			if c.HemisphereFlips && rng.Float64() < 0.05 {
				q = rot.Neg(q)
			}
			tk.Qw[i], tk.Qx[i], tk.Qy[i], tk.Qz[i] = q.Real, q.Imag, q.Jmag, q.Kmag
		}
		if c.IMU {
			g := rot.InvRotate(qs, m.Omega(s, t))
			g = r3.Add(r3.Add(g, gb), randomNormal(rng, c.GyroNoise))
			a := rot.InvRotate(qs, m.SpecificForce(s, t))
			a = r3.Add(r3.Add(a, ab), randomNormal(rng, c.AccelNoise))
			tk.Gx[i], tk.Gy[i], tk.Gz[i] = g.X, g.Y, g.Z
			tk.Ax[i], tk.Ay[i], tk.Az[i] = a.X, a.Y, a.Z
		}
		if c.Magnetometer {
			b := rot.InvRotate(qs, magneticField)
			tk.Mx[i], tk.My[i], tk.Mz[i] = b.X, b.Y, b.Z
		}
	}
	return tk, mount
}

// randomVec returns a vector of length mag in a random direction.
func randomVec(rng *rand.Rand, mag float64) r3.Vec {
	if mag == 0 {
		return r3.Vec{}
	}
	v := r3.Vec{X: rng.NormFloat64(), Y: rng.NormFloat64(), Z: rng.NormFloat64()}
	return r3.Scale(mag/r3.Norm(v), v)
}

// randomNormal returns a vector of independent N(0, sd²) components.
func randomNormal(rng *rand.Rand, sd float64) r3.Vec {
	if sd == 0 {
		return r3.Vec{}
	}
	return r3.Vec{X: sd * rng.NormFloat64(), Y: sd * rng.NormFloat64(), Z: sd * rng.NormFloat64()}
}

// cut removes the samples with start < t < end from every column of tk.
func cut(tk *kinchainv1.Track, start, end float64) {
	keep := make([]bool, len(tk.TimeS))
	for i, t := range tk.TimeS {
		keep[i] = !(t > start && t < end)
	}
	for _, col := range []*[]float64{&tk.TimeS, &tk.Qw, &tk.Qx, &tk.Qy, &tk.Qz, &tk.Gx, &tk.Gy, &tk.Gz,
		&tk.Ax, &tk.Ay, &tk.Az, &tk.Mx, &tk.My, &tk.Mz, &tk.Px, &tk.Py, &tk.Pz} {
		if len(*col) == 0 {
			continue
		}
		out := (*col)[:0]
		for i, v := range *col {
			if keep[i] {
				out = append(out, v)
			}
		}
		*col = out
	}
}
