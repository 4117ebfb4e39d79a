package validate

import (
	"fmt"

	"google.golang.org/protobuf/reflect/protoreflect"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
)

// MaxFilterOrder is the highest Butterworth prototype order accepted in
// AnalysisOptions.filter_order. Beyond 8 a low-pass designed from cascaded
// second-order sections gains nothing for motion data and its
// coefficients grow ill-conditioned at low normalised cutoffs (common
// practice, no source).
const MaxFilterOrder = 8

// Options checks analysis options with the default limits; see
// OptionsWithin. A nil o is valid (all defaults).
func Options(o *kinchainv1.AnalysisOptions) error {
	return OptionsWithin(o, Limits{})
}

// OptionsWithin checks analysis options against lim's rate range (zero
// fields: defaults). Every failure has ReasonBadOption and a field path
// under "options.":
//
//   - cutoff_hz, when set: finite and ≥ 0 (0 turns filtering off);
//   - filter_order: 0 (the default) to MaxFilterOrder;
//   - rate_hz: 0 (the highest track rate) or finite within
//     lim.MinRate..lim.MaxRate;
//   - speed, angular_velocity_source, orientation_source, handedness: a
//     value the enum defines;
//   - neutral, when set: finite bounds, start before end;
//   - gyro_range_dps, accel_range_g: 0 (the default) or finite and
//     positive.
func OptionsWithin(o *kinchainv1.AnalysisOptions, lim Limits) error {
	if o == nil {
		return nil
	}
	lim = lim.WithDefaults()
	bad := func(field, format string, a ...any) error {
		return newErr("options."+field, ReasonBadOption, fmt.Sprintf(format, a...))
	}
	if o.CutoffHz != nil {
		c := o.GetCutoffHz()
		switch {
		case !finite(c):
			return bad("cutoff_hz", "not finite (%s)", num(c))
		case c < 0:
			return bad("cutoff_hz", "%s Hz is negative (0 turns filtering off)", num(c))
		}
	}
	if f := o.GetFilterOrder(); f < 0 || f > MaxFilterOrder {
		return bad("filter_order", "%d is outside 0..%d (0: the default)", f, MaxFilterOrder)
	}
	if r := o.GetRateHz(); r != 0 {
		switch {
		case !finite(r):
			return bad("rate_hz", "not finite (%s)", num(r))
		case r < lim.MinRate || r > lim.MaxRate:
			return bad("rate_hz", "%s Hz is outside %s–%s Hz (0: the highest track rate)", num(r), num(lim.MinRate), num(lim.MaxRate))
		}
	}
	enums := []struct {
		field string
		v     protoreflect.Enum
	}{
		{"speed", o.GetSpeed()},
		{"angular_velocity_source", o.GetAngularVelocitySource()},
		{"orientation_source", o.GetOrientationSource()},
		{"handedness", o.GetHandedness()},
	}
	for _, e := range enums {
		if n := e.v.Number(); !enumKnown(e.v.Descriptor().Values(), int32(n)) {
			return bad(e.field, "unknown value %d", n)
		}
	}
	if w := o.GetNeutral(); w != nil {
		if err := window("options.neutral", w, ReasonBadOption); err != nil {
			return err
		}
	}
	for _, r := range []struct {
		field, unit string
		v           float64
	}{
		{"gyro_range_dps", "deg/s", o.GetGyroRangeDps()},
		{"accel_range_g", "g", o.GetAccelRangeG()},
	} {
		switch {
		case !finite(r.v):
			return bad(r.field, "not finite (%s)", num(r.v))
		case r.v < 0:
			return bad(r.field, "%s %s is negative (0: the default)", num(r.v), r.unit)
		}
	}
	return nil
}

// enumKnown reports whether n is a value of the enum.
func enumKnown(vals protoreflect.EnumValueDescriptors, n int32) bool {
	return vals.ByNumber(protoreflect.EnumNumber(n)) != nil
}
