package cli

import (
	"context"
	"flag"
	"io"
	"os"
	"strings"

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
	c, _, err := synth.Generate(cfg)
	if err != nil {
		return err
	}
	w := stdout
	if *out != "" {
		f, err := os.Create(*out)
		if err != nil {
			return err
		}
		defer f.Close()
		w = f
		if err := encode.WriteCaptureCSV(w, c); err != nil {
			return err
		}
		return f.Close()
	}
	return encode.WriteCaptureCSV(w, c)
}
