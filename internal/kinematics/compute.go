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

// Options tune Compute. The zero value gives the documented defaults.
type Options struct {
	// Cutoff is the low-pass cutoff, Hz; nil: DefaultCutoff; 0: no
	// filtering.
	Cutoff *float64
	// Order is the Butterworth order per pass; 0: DefaultOrder.
	Order int
	// Residual chooses each segment's cutoff by Winter's residual analysis
	// (condition.ResidualCutoff on each world component of the unfiltered
	// angular velocity, taking the highest of the three); Cutoff is then
	// ignored.
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
	var scratch []float64
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
		if opt.Source == kinchainv1.AngularVelocitySource_ANGULAR_VELOCITY_SOURCE_GYROSCOPE && cs.Gyro != nil {
			FromGyro(s.Q, cs.Gyro, s.Valid, s.Omega, s.OmegaBody)
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
			c, scratch, err = residualCutoff(s.Omega, s.Valid, fs, order, scratch)
			if err != nil {
				return nil, err
			}
			if c > 0 {
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

// residualCutoff applies condition.ResidualCutoff to each world component
// of w over the longest run of valid samples and returns the highest of the
// three cutoffs (so that no component loses content the analysis found), or
// 0 when the run is too short to analyse.
func residualCutoff(w []r3.Vec, valid []bool, fs float64, order int, buf []float64) (float64, []float64, error) {
	lo, hi := 0, 0
	forRuns(valid, len(w), func(a, b int) {
		if b-a > hi-lo {
			lo, hi = a, b
		}
	})
	if hi-lo < 3 {
		return 0, buf, nil
	}
	if cap(buf) < hi-lo {
		buf = make([]float64, hi-lo)
	}
	x := buf[:hi-lo]
	best := 0.0
	for c := 0; c < 3; c++ {
		for i := range x {
			v := w[lo+i]
			x[i] = [3]float64{v.X, v.Y, v.Z}[c]
		}
		fc, err := condition.ResidualCutoff(x, fs, order)
		if err != nil {
			return 0, buf, err
		}
		best = math.Max(best, fc)
	}
	return best, buf, nil
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
