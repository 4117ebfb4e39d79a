package kinematics

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/num/quat"
	"gonum.org/v1/gonum/spatial/r3"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/condition"
	"github.com/kinchain/kinchain/internal/rot"
)

// Filter defaults.
const (
	// DefaultCutoff is the default low-pass cutoff applied to angular
	// velocity, Hz. A golf swing's segment rotations have nearly all their
	// content below about 10 Hz, while impact shock, soft-tissue wobble and
	// sensor noise lie higher; 20 Hz keeps the fastest (club) speed peak
	// within about 1 % (common practice, no source; see DEVELOPERS.md).
	DefaultCutoff = 20.0
	// DefaultOrder is the default Butterworth order per pass; the
	// zero-phase (forward-backward) response has twice this order.
	DefaultOrder = 2
	// MaxOrder is the highest order accepted per pass.
	MaxOrder = 8
	// ClampFraction: a cutoff at or above the Nyquist frequency is lowered
	// to this fraction of it (WARNING_CODE_CUTOFF_CLAMPED).
	ClampFraction = 0.9
)

// Bounds of the cutoff chosen by residual analysis (Options.Residual), Hz.
// The analysis itself searches up to 0.3 × Nyquist
// (condition.ResidualCutoff); its result is then raised to
// ResidualMinCutoff or lowered to ResidualMaxCutoff. Both are our choices
// (common practice, no source).
const (
	// ResidualMinCutoff is the lowest cutoff residual analysis may choose.
	// A swing's segment rotations carry their content up to about 10 Hz;
	// on the synthetic model golfer a 5 Hz cutoff costs the slowest-pulsed
	// segment (the pelvis) 2.3 % of its peak speed and 4 Hz already 5 %,
	// so below 5 Hz the filter would take away the swing itself, whatever
	// the noise.
	ResidualMinCutoff = 5.0
	// ResidualMaxCutoff is the highest cutoff residual analysis may choose:
	// five times the top of the swing band, where the zero-phase filter
	// passes a 10 Hz component at 99.8 % (1/(1 + (10/50)⁴) for the default
	// order). A capture without measurable noise (the analysis then runs
	// into its 0.3 × Nyquist search limit) is filtered only above anything a
	// swing contains.
	ResidualMaxCutoff = 50.0
)

// Options tune Compute. The zero value gives the documented defaults.
type Options struct {
	// Cutoff is the low-pass cutoff, Hz; nil: DefaultCutoff; 0: no
	// filtering.
	Cutoff *float64
	// Order is the Butterworth order per pass; 0: DefaultOrder.
	Order int
	// Residual chooses each segment's cutoff by Winter's residual analysis
	// (condition.ResidualCutoff) on the measured signal, whose noise is
	// white as the method assumes: the world angular displacement (see
	// angularDisplacement) for angular velocity differenced from
	// orientations, the angular velocity itself when it comes from the
	// gyroscope or the orientation was fused from one. The highest of the
	// three world components' cutoffs is taken, bounded to
	// [ResidualMinCutoff, ResidualMaxCutoff]; Cutoff is then ignored.
	Residual bool
	// Speed selects the scalar speed; unspecified: magnitude.
	Speed kinchainv1.SpeedDefinition
	// Source selects where angular velocity comes from; unspecified:
	// orientation. Gyroscope falls back to orientation for segments without
	// gyroscope readings.
	Source kinchainv1.AngularVelocitySource
}

// OptionError reports an option Compute cannot use; Field is the
// AnalysisOptions field.
type OptionError struct {
	Field  string
	Detail string
}

// Error returns "field: detail".
func (e *OptionError) Error() string { return e.Field + ": " + e.Detail }

func (o Options) check() error {
	if c := o.Cutoff; c != nil && !(*c >= 0 && !math.IsInf(*c, 0)) {
		return &OptionError{"cutoff_hz", fmt.Sprintf("%g Hz is not a non-negative finite frequency", *c)}
	}
	if o.Order < 0 || o.Order > MaxOrder {
		return &OptionError{"filter_order", fmt.Sprintf("%d outside 0..%d", o.Order, MaxOrder)}
	}
	if _, ok := kinchainv1.SpeedDefinition_name[int32(o.Speed)]; !ok {
		return &OptionError{"speed", fmt.Sprintf("unknown speed definition %d", o.Speed)}
	}
	if _, ok := kinchainv1.AngularVelocitySource_name[int32(o.Source)]; !ok {
		return &OptionError{"angular_velocity_source", fmt.Sprintf("unknown source %d", o.Source)}
	}
	return nil
}

// Compute derives the kinematics of every conditioned segment:
//
//  1. the world angular velocity, from orientation differences
//     (AngularVelocity) or, when asked and available, the gyroscope
//     (FromGyro: ω_world = q ⊗ gyro ⊗ q*);
//  2. each of its components low-pass filtered by the zero-phase
//     Butterworth filter of condition, separately over each run of valid
//     samples (filtering a vector's components commutes with constant
//     rotations, so speeds stay frame-invariant; unit norm and continuity of
//     the orientations are not touched);
//  3. the segment-frame angular velocity as the filtered world vector in the
//     segment frame at the same sample, ω_body = q* ⊗ ω_world ⊗ q, so that
//     Omega and OmegaBody always describe the same vector;
//  4. the selected speed (Speeds).
//
// Result.Warnings holds this stage's warnings only (a clamped cutoff); the
// conditioning warnings stay in r.Warnings.
func Compute(r *condition.Result, opt Options) (*Result, error) {
	if err := opt.check(); err != nil {
		return nil, err
	}
	if r == nil || !(r.Grid.Rate > 0) {
		return nil, &OptionError{"rate_hz", "no conditioned grid"}
	}
	order := opt.Order
	if order == 0 {
		order = DefaultOrder
	}
	speed := opt.Speed
	if speed == kinchainv1.SpeedDefinition_SPEED_DEFINITION_UNSPECIFIED {
		speed = kinchainv1.SpeedDefinition_SPEED_DEFINITION_MAGNITUDE
	}
	out := &Result{Grid: r.Grid, Speed: speed, Segments: make([]Segment, len(r.Segments))}
	fs := r.Grid.Rate
	var fixed *condition.Filter
	fixedCutoff := DefaultCutoff
	if opt.Cutoff != nil {
		fixedCutoff = *opt.Cutoff
	}
	if !opt.Residual && fixedCutoff > 0 {
		c, w := clampCutoff(fixedCutoff, fs)
		if w != nil {
			out.Warnings = append(out.Warnings, w)
		}
		sos, err := condition.Butterworth(order, c, fs)
		if err != nil {
			return nil, &OptionError{"cutoff_hz", err.Error()}
		}
		fixed = condition.NewFilter(sos)
		fixedCutoff = c
	}
	var rs residualScratch
	for k := range r.Segments {
		cs := &r.Segments[k]
		s := &out.Segments[k]
		n := len(cs.Q)
		*s = Segment{
			Segment:    cs.Segment,
			Q:          cs.Q,
			Valid:      isolatedInvalid(cs.Valid),
			Omega:      make([]r3.Vec, n),
			OmegaBody:  make([]r3.Vec, n),
			Speed:      make([]float64, n),
			Accel:      cs.Accel,
			SourceRate: cs.SourceRate,
		}
		// measuredRate: the angular velocity is (or is as good as) a
		// gyroscope reading rather than a difference of orientations.
		measuredRate := cs.Quality.GetFused()
		if opt.Source == kinchainv1.AngularVelocitySource_ANGULAR_VELOCITY_SOURCE_GYROSCOPE && cs.Gyro != nil {
			FromGyro(s.Q, cs.Gyro, s.Valid, s.Omega, s.OmegaBody)
			measuredRate = true
		} else {
			AngularVelocity(s.Q, s.Valid, fs, s.Omega, nil)
		}
		f := fixed
		if f != nil {
			s.Cutoff = fixedCutoff
		}
		if opt.Residual {
			var c float64
			var err error
			c, err = rs.cutoff(s.Q, s.Omega, s.Valid, measuredRate, fs, order)
			if err != nil {
				return nil, err
			}
			if c > 0 {
				c = boundResidual(c)
				c, _ = clampCutoff(c, fs)
				sos, err := condition.Butterworth(order, c, fs)
				if err != nil {
					return nil, err
				}
				f, s.Cutoff = condition.NewFilter(sos), c
			}
		}
		if f != nil {
			forRuns(s.Valid, n, func(lo, hi int) {
				f.ApplyVec(s.Omega[lo:hi], s.Omega[lo:hi])
			})
		}
		toBody(s.Q, s.Omega, s.Valid, s.OmegaBody)
		Speeds(speed, s.Omega, s.OmegaBody, s.Valid, s.Speed)
	}
	return out, nil
}

// toBody sets body[i] = q[i]* ⊗ world[i] ⊗ q[i], the world angular velocity
// in the segment frame at the same sample (zero at invalid samples).
func toBody(q []quat.Number, world []r3.Vec, valid []bool, body []r3.Vec) {
	for i := range q {
		if valid != nil && !valid[i] {
			body[i] = r3.Vec{}
			continue
		}
		body[i] = rot.InvRotate(q[i], world[i])
	}
}

// clampCutoff lowers a cutoff at or above the Nyquist frequency fs/2 to
// ClampFraction of it, with a warning.
func clampCutoff(c, fs float64) (float64, *kinchainv1.Warning) {
	nyq := fs / 2
	if c < nyq {
		return c, nil
	}
	low := ClampFraction * nyq
	return low, &kinchainv1.Warning{
		Code: kinchainv1.WarningCode_WARNING_CODE_CUTOFF_CLAMPED,
		Message: fmt.Sprintf("low-pass cutoff %g Hz is not below the Nyquist frequency %g Hz of the %g Hz common rate; lowered to %g Hz",
			c, nyq, fs, low),
	}
}

// forRuns calls fn for each maximal run [lo, hi) of valid samples (all of
// [0, n) when valid is nil) that is at least two samples long.
func forRuns(valid []bool, n int, fn func(lo, hi int)) {
	if valid == nil {
		if n >= 2 {
			fn(0, n)
		}
		return
	}
	for i := 0; i < n; {
		if !valid[i] {
			i++
			continue
		}
		j := i
		for j < n && valid[j] {
			j++
		}
		if j-i >= 2 {
			fn(i, j)
		}
		i = j
	}
}

// isolatedInvalid returns valid with isolated valid samples (no valid
// neighbour, so no angular velocity) marked invalid; it copies only when it
// changes something.
func isolatedInvalid(valid []bool) []bool {
	if valid == nil {
		return nil
	}
	n := len(valid)
	var out []bool
	for i, v := range valid {
		if v && (i == 0 || !valid[i-1]) && (i == n-1 || !valid[i+1]) {
			if out == nil {
				out = append([]bool(nil), valid...)
			}
			out[i] = false
		}
	}
	if out == nil {
		return valid
	}
	return out
}

// residualScratch holds the buffers of residual analysis, reused across
// segments.
type residualScratch struct {
	x   []float64
	phi []r3.Vec
}

// cutoff chooses a segment's cutoff by Winter's residual analysis (Winter,
// Biomechanics and Motor Control of Human Movement, 4th ed., 2009,
// §3.4.4.3; condition.ResidualCutoff) over the longest run of valid
// samples, and returns the highest of the three world components' cutoffs
// (so that no component loses content the analysis found), or 0 when the
// run is too short to analyse. The result is not yet bounded
// (boundResidual).
//
// Winter applies the method to displacement-like signals, in which white
// measurement noise has a flat spectrum that the straight line over the
// noise region models. Angular velocity differenced from orientations is
// not such a signal: the central difference shapes the noise's power by
// sin²(2πf/fs), from zero at 0 Hz up to its maximum at fs/4, so the line
// fitted over the noise region extrapolates to an intercept far above the
// noise left at low frequencies, and the analysis picks a cutoff that takes
// most of the swing away (0.5–1.9 Hz on the model golfer with 0.2° noise,
// peaks 18–69 % low).
// The analysis therefore runs on the signal that was measured:
//
//   - orientations (measuredRate false): each component of the world
//     angular displacement Φ (angularDisplacement), whose derivative is
//     ω_world and whose noise is the orientations' own, white noise;
//   - a gyroscope, or orientations fused from one (measuredRate true): ω
//     itself, whose noise is the gyroscope's white noise (Φ would carry
//     its integral, a random walk).
//
// The cutoff found is the one applied to ω, as Winter filters the
// displacement and differentiates the result.
func (rs *residualScratch) cutoff(q []quat.Number, w []r3.Vec, valid []bool, measuredRate bool, fs float64, order int) (float64, error) {
	lo, hi := 0, 0
	forRuns(valid, len(w), func(a, b int) {
		if b-a > hi-lo {
			lo, hi = a, b
		}
	})
	n := hi - lo
	if n < 3 {
		return 0, nil
	}
	if cap(rs.x) < n {
		rs.x = make([]float64, n)
	}
	x := rs.x[:n]
	sig := w[lo:hi]
	if !measuredRate {
		if cap(rs.phi) < n {
			rs.phi = make([]r3.Vec, n)
		}
		sig = rs.phi[:n]
		angularDisplacement(q[lo:hi], sig)
	}
	best := 0.0
	for c := 0; c < 3; c++ {
		for i, v := range sig {
			x[i] = [3]float64{v.X, v.Y, v.Z}[c]
		}
		fc, err := condition.ResidualCutoff(x, fs, order)
		if err != nil {
			return 0, err
		}
		best = math.Max(best, fc)
	}
	return best, nil
}

// boundResidual bounds a cutoff chosen by residual analysis to
// [ResidualMinCutoff, ResidualMaxCutoff], Hz.
func boundResidual(c float64) float64 {
	return math.Max(ResidualMinCutoff, math.Min(ResidualMaxCutoff, c))
}

// angularDisplacement writes the world angular displacement of the
// orientations q (segment → world), rad: the running sum of the rotation
// vectors of the sample-to-sample rotations in the world frame,
//
//	Φ[0] = 0,  Φ[i] = Φ[i−1] + rotvec(q[i] ⊗ q[i−1]*),
//
// a continuous tangent-space representation of the orientation history
// (it is not the orientation's rotation vector: rotations about changing
// axes do not add). Its central difference (Φ[i+1] − Φ[i−1])·rate/2 is
// AngularVelocity's ω_world to second order, exactly for rotation about a
// fixed axis, where Φ[i] is the angle turned times the axis. For
// orientations with small white noise n[i] (q[i] = q̄[i] ⊗ exp(n[i]/2)),
// the sum telescopes: Φ[i] = Φ̄[i] + R[i]·n[i] − R[0]·n[0] up to terms of
// order |ω|·Δt·n, so Φ carries the orientations' white noise, as Winter's
// residual analysis assumes of a displacement (4th ed., §3.4.4.3). out
// must have len(q) entries.
func angularDisplacement(q []quat.Number, out []r3.Vec) {
	if len(q) == 0 {
		return
	}
	out[0] = r3.Vec{}
	for i := 1; i < len(q); i++ {
		out[i] = r3.Add(out[i-1], rotVec(rot.Mul(q[i], rot.Conj(q[i-1]))))
	}
}

// Speeds writes the scalar speed of each sample, rad/s, per definition d:
// magnitude |ω|, vertical |ω_world · z|, or long-axis |ω_body · z| (the
// segment's own z axis is its long axis). Invalid samples get 0.
func Speeds(d kinchainv1.SpeedDefinition, world, body []r3.Vec, valid []bool, out []float64) {
	for i := range out {
		if valid != nil && !valid[i] {
			out[i] = 0
			continue
		}
		switch d {
		case kinchainv1.SpeedDefinition_SPEED_DEFINITION_VERTICAL:
			out[i] = math.Abs(world[i].Z)
		case kinchainv1.SpeedDefinition_SPEED_DEFINITION_LONG_AXIS:
			out[i] = math.Abs(body[i].Z)
		default:
			w := world[i]
			out[i] = math.Sqrt(w.X*w.X + w.Y*w.Y + w.Z*w.Z)
		}
	}
}
