package cli

import (
	"flag"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/capture"
	"github.com/kinchain/kinchain/internal/decode"
	"github.com/kinchain/kinchain/internal/synth"
	"github.com/kinchain/kinchain/internal/validate"
)

// analysisFlags are the capture and analysis flags shared by analyze, plot
// and stream.
type analysisFlags struct {
	demo       bool
	cutoff     string
	order      int
	residual   bool
	speed      string
	handedness string
	rate       float64
	neutral    string
	series     bool
	gyro       bool
	fuse       bool
	noMag      bool
	gyroRange  float64
	accelRange float64
}

func (f *analysisFlags) register(fs *flag.FlagSet) {
	fs.BoolVar(&f.demo, "demo", false, "analyse the built-in synthetic model golfer instead of a file")
	fs.StringVar(&f.cutoff, "cutoff-hz", "", "low-pass cutoff for angular velocity in Hz; 0 turns filtering off (default 20)")
	fs.IntVar(&f.order, "order", 0, "Butterworth order of each filter pass (default 2)")
	fs.BoolVar(&f.residual, "residual", false, "choose each segment's cutoff by Winter's residual analysis")
	fs.StringVar(&f.speed, "speed", "magnitude", "speed definition: magnitude, vertical or long-axis")
	fs.StringVar(&f.handedness, "handedness", "", "override the capture's handedness: right or left")
	fs.Float64Var(&f.rate, "rate", 0, "common resampling rate in Hz (default: the highest track rate)")
	fs.StringVar(&f.neutral, "neutral", "", "neutral-pose window START:END in seconds, for sensor-to-segment alignment")
	fs.BoolVar(&f.series, "series", false, "include the filtered angular velocity and speed series (json output)")
	fs.BoolVar(&f.gyro, "gyro", false, "take angular velocity from the gyroscope columns where present")
	fs.BoolVar(&f.fuse, "fuse", false, "estimate orientation from raw IMU columns even where quaternions are present")
	fs.BoolVar(&f.noMag, "no-mag", false, "in fusion, ignore magnetometer columns (heading drifts freely)")
	fs.Float64Var(&f.gyroRange, "gyro-range-dps", 0, "gyroscope full-scale range in deg/s, for the saturation findings of fused tracks (default 2000)")
	fs.Float64Var(&f.accelRange, "accel-range-g", 0, "accelerometer full-scale range in g, for the clipping findings of fused tracks (default 16)")
}

// options converts the flags into AnalysisOptions; errors name the flag.
func (f *analysisFlags) options() (*kinchainv1.AnalysisOptions, error) {
	o := &kinchainv1.AnalysisOptions{
		FilterOrder:              int32(f.order),
		ResidualCutoff:           f.residual,
		RateHz:                   f.rate,
		IncludeSeries:            f.series,
		FusionIgnoreMagnetometer: f.noMag,
		GyroRangeDps:             f.gyroRange,
		AccelRangeG:              f.accelRange,
	}
	if !(f.gyroRange >= 0) || math.IsInf(f.gyroRange, 0) {
		return nil, usagef("--gyro-range-dps: %v is not a positive range", f.gyroRange)
	}
	if !(f.accelRange >= 0) || math.IsInf(f.accelRange, 0) {
		return nil, usagef("--accel-range-g: %v is not a positive range", f.accelRange)
	}
	if f.cutoff != "" {
		v, err := strconv.ParseFloat(f.cutoff, 64)
		if err != nil {
			return nil, usagef("--cutoff-hz: %q is not a number", f.cutoff)
		}
		o.CutoffHz = &v
	}
	switch strings.ToLower(f.speed) {
	case "", "magnitude":
		o.Speed = kinchainv1.SpeedDefinition_SPEED_DEFINITION_MAGNITUDE
	case "vertical":
		o.Speed = kinchainv1.SpeedDefinition_SPEED_DEFINITION_VERTICAL
	case "long-axis", "long_axis":
		o.Speed = kinchainv1.SpeedDefinition_SPEED_DEFINITION_LONG_AXIS
	default:
		return nil, usagef("--speed: %q is not one of magnitude, vertical, long-axis", f.speed)
	}
	switch strings.ToLower(f.handedness) {
	case "":
	case "right":
		o.Handedness = kinchainv1.Handedness_HANDEDNESS_RIGHT
	case "left":
		o.Handedness = kinchainv1.Handedness_HANDEDNESS_LEFT
	default:
		return nil, usagef("--handedness: %q is not right or left", f.handedness)
	}
	if f.neutral != "" {
		w, err := parseWindow(f.neutral)
		if err != nil {
			return nil, usagef("--neutral: %v", err)
		}
		o.Neutral = w
	}
	if f.gyro {
		o.AngularVelocitySource = kinchainv1.AngularVelocitySource_ANGULAR_VELOCITY_SOURCE_GYROSCOPE
	}
	if f.fuse {
		o.OrientationSource = kinchainv1.OrientationSource_ORIENTATION_SOURCE_FUSION
	}
	return o, nil
}

// parseWindow parses "START:END" in seconds.
func parseWindow(s string) (*kinchainv1.TimeWindow, error) {
	a, b, ok := strings.Cut(s, ":")
	if !ok {
		return nil, fmt.Errorf("%q is not START:END", s)
	}
	start, err1 := strconv.ParseFloat(strings.TrimSpace(a), 64)
	end, err2 := strconv.ParseFloat(strings.TrimSpace(b), 64)
	if err1 != nil || err2 != nil {
		return nil, fmt.Errorf("%q is not START:END in seconds", s)
	}
	if !(end > start) {
		return nil, fmt.Errorf("%q: END must be after START", s)
	}
	return &kinchainv1.TimeWindow{StartS: start, EndS: end}, nil
}

// demoCapture is the built-in capture: the synthetic model golfer with its
// default settings.
func demoCapture() (*kinchainv1.Capture, error) {
	c, _, err := synth.Generate(synth.Config{})
	return c, err
}

// readCapture loads the capture named by the positional arguments ("-" for
// stdin) or the demo, decodes and validates it; errors are prefixed with the
// file name.
func (f *analysisFlags) readCapture(pos []string, stdin io.Reader, lim validate.Limits) (*capture.Capture, error) {
	pc, loc, name, err := f.decodeCapture(pos, stdin, lim)
	if err != nil {
		return nil, err
	}
	c, err := validate.Capture(pc, lim, loc)
	if err != nil {
		return nil, fmt.Errorf("%s: %w", name, err)
	}
	return c, nil
}

// decodeCapture loads and decodes the capture named by the positional
// arguments ("-" for stdin) or the demo, and returns it with its line
// locator (CSV) and a name for messages.
func (f *analysisFlags) decodeCapture(pos []string, stdin io.Reader, lim validate.Limits) (*kinchainv1.Capture, validate.Locator, string, error) {
	switch {
	case f.demo && len(pos) > 0:
		return nil, nil, "", usagef("give either --demo or a capture file, not both")
	case f.demo:
		pc, err := demoCapture()
		return pc, nil, "demo", err
	case len(pos) == 0:
		return nil, nil, "", usagef("no capture given: name a file (or - for standard input), or use --demo")
	case len(pos) > 1:
		return nil, nil, "", usagef("one capture file at a time (got %d)", len(pos))
	default:
		name := pos[0]
		var (
			data []byte
			err  error
		)
		if name == "-" {
			data, err = io.ReadAll(io.LimitReader(stdin, maxBytes(lim)+1))
			name = "stdin"
		} else {
			data, err = os.ReadFile(name)
		}
		if err != nil {
			return nil, nil, "", err
		}
		if int64(len(data)) > maxBytes(lim) {
			return nil, nil, "", fmt.Errorf("%s: larger than the %d-byte limit", name, maxBytes(lim))
		}
		pc, loc, err := decode.File(filepath.Base(name), data, lim)
		if err != nil {
			return nil, nil, "", fmt.Errorf("%s: %w", name, err)
		}
		return pc, loc, name, nil
	}
}

func maxBytes(lim validate.Limits) int64 {
	if lim.MaxBytes > 0 {
		return int64(lim.MaxBytes)
	}
	return int64(validate.DefaultLimits().MaxBytes)
}
