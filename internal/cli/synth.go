package cli

import (
	"bytes"
	"context"
	"flag"
	"fmt"
	"io"
	"os"
	"strconv"
	"strings"

	"google.golang.org/protobuf/encoding/protojson"
	"google.golang.org/protobuf/proto"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/encode"
	"github.com/kinchain/kinchain/internal/synth"
)

// RunSynth implements `kinchain synth`: write a synthetic capture of the
// model golfer (CSV) whose ground truth is known.
func RunSynth(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	fs := flag.NewFlagSet("synth", flag.ContinueOnError)
	fs.SetOutput(stderr)
	cfg := synth.Config{}
	fs.Int64Var(&cfg.Seed, "seed", 0, "random seed for noise, jitter and dropouts")
	fs.Float64Var(&cfg.Rate, "rate", 0, "sample rate in Hz (default 1000)")
	hand := fs.String("handedness", "right", "right or left (the mirror image of the right-handed model)")
	out := fs.String("out", "", "write to this file instead of standard output")
	format := fs.String("format", "csv", "output format: csv, json (protojson Capture), pb (binary Capture) or request-json (an AnalyzeCaptureRequest for grpcurl)")
	registerSynthFaults(fs, &cfg)
	pos, err := parseArgs(fs, args)
	if err != nil {
		return err
	}
	if len(pos) > 0 {
		return usagef("synth takes no positional arguments (got %q)", strings.Join(pos, " "))
	}
	switch *hand {
	case "right":
		cfg.Handedness = kinchainv1.Handedness_HANDEDNESS_RIGHT
	case "left":
		cfg.Handedness = kinchainv1.Handedness_HANDEDNESS_LEFT
	default:
		return usagef("--handedness: %q is not right or left", *hand)
	}
	if cfg.OmitQuaternions {
		cfg.IMU = true
	}
	c, _, err := synth.Generate(cfg)
	if err != nil {
		return err
	}
	var data []byte
	switch *format {
	case "csv":
		var b bytes.Buffer
		if err := encode.WriteCaptureCSV(&b, c); err != nil {
			return err
		}
		data = b.Bytes()
	case "json":
		data, err = protojson.MarshalOptions{UseProtoNames: true}.Marshal(c)
	case "request-json":
		data, err = protojson.MarshalOptions{UseProtoNames: true}.Marshal(&kinchainv1.AnalyzeCaptureRequest{Capture: c})
	case "pb":
		data, err = proto.Marshal(c)
	default:
		return usagef("--format: %q is not csv, json, pb or request-json", *format)
	}
	if err != nil {
		return err
	}
	if *format == "json" || *format == "request-json" {
		data = append(data, '\n')
	}
	if *out == "" {
		_, err = stdout.Write(data)
		return err
	}
	return os.WriteFile(*out, data, 0o644)
}

// registerSynthFaults adds the flags that shape the model golfer and the
// faults a capture may carry.
func registerSynthFaults(fs *flag.FlagSet, cfg *synth.Config) {
	fs.IntVar(&cfg.Swings, "swings", 0, "number of full swings (default 1)")
	fs.IntVar(&cfg.Waggles, "waggles", 0, "waggles before the first swing (to be rejected by the analysis)")
	fs.IntVar(&cfg.HalfSwings, "half-swings", 0, "half swings before the first full swing (to be rejected)")
	fs.Float64Var(&cfg.Tempo, "tempo", 0, "backswing : downswing time ratio (default 3)")
	fs.Float64Var(&cfg.Downswing, "downswing-s", 0, "top-to-impact time in s (default 0.25)")
	fs.Float64Var(&cfg.ThoraxFlexionDeg, "thorax-flexion-deg", 0, "thorax forward bend at address in degrees (default 38)")
	fs.Float64Var(&cfg.TargetHeadingDeg, "target-heading-deg", 0, "direction toward the target in the world, degrees from +x about +z")
	fs.BoolVar(&cfg.LateThorax, "late-thorax", false, "fault: the thorax reverses late and peaks after the lead arm")
	fs.BoolVar(&cfg.EarlyRelease, "early-release", false, "fault: the club peaks early, before the lead arm and hand")
	fs.IntVar(&cfg.Dropouts, "dropouts", 0, "number of gaps cut into random tracks")
	fs.Float64Var(&cfg.DropoutMs, "dropout-ms", 0, "length of each gap in ms (default 20)")
	fs.Float64Var(&cfg.JitterMs, "jitter-ms", 0, "standard deviation of sample-time jitter in ms")
	fs.Float64Var(&cfg.NoiseDeg, "noise-deg", 0, "standard deviation of orientation noise in degrees")
	fs.Float64Var(&cfg.MountingDeg, "mounting-deg", 0, "turn each sensor on its segment by this angle about a random axis")
	fs.BoolVar(&cfg.IMU, "imu", false, "add gyroscope and accelerometer columns")
	fs.BoolVar(&cfg.Magnetometer, "mag", false, "add magnetometer columns")
	fs.BoolVar(&cfg.OmitQuaternions, "raw", false, "leave out the quaternion columns (raw IMU tracks; implies --imu)")
	fs.Func("segments", "comma-separated subset of segments to write (default all ten)", func(s string) error {
		for _, name := range strings.Split(s, ",") {
			seg, ok := segmentByName(strings.TrimSpace(name))
			if !ok {
				return fmt.Errorf("unknown segment %q", name)
			}
			cfg.Segments = append(cfg.Segments, seg)
		}
		return nil
	})
	fs.Func("segment-rate", "SEGMENT=HZ: a different rate for one segment (repeatable)", func(s string) error {
		name, hz, ok := strings.Cut(s, "=")
		seg, known := segmentByName(strings.TrimSpace(name))
		if !ok || !known {
			return fmt.Errorf("%q is not SEGMENT=HZ with a known segment", s)
		}
		v, err := strconv.ParseFloat(hz, 64)
		if err != nil || !(v > 0) {
			return fmt.Errorf("%q: rate must be a positive number", s)
		}
		if cfg.SegmentRates == nil {
			cfg.SegmentRates = map[kinchainv1.Segment]float64{}
		}
		cfg.SegmentRates[seg] = v
		return nil
	})
}

// segmentByName maps a lower-case segment name ("lead_hand") to its value.
func segmentByName(name string) (kinchainv1.Segment, bool) {
	v, ok := kinchainv1.Segment_value["SEGMENT_"+strings.ToUpper(name)]
	if !ok || v == 0 {
		return 0, false
	}
	return kinchainv1.Segment(v), true
}
