package cli

import (
	"context"
	"flag"
	"fmt"
	"io"

	"google.golang.org/protobuf/encoding/protojson"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/encode"
	"github.com/kinchain/kinchain/internal/engine"
)

// RunAnalyze implements `kinchain analyze [flags] FILE|-`: analyse one
// capture and print the report as text or as the protojson of
// AnalyzeCaptureResponse.
func RunAnalyze(ctx context.Context, args []string, stdin io.Reader, stdout, stderr io.Writer) error {
	fs := flag.NewFlagSet("analyze", flag.ContinueOnError)
	fs.SetOutput(stderr)
	fs.Usage = func() {
		io.WriteString(stderr, "Usage: kinchain analyze [flags] FILE|-   (or --demo)\n\nFILE is a capture in CSV (.csv), protojson (.json) or binary protobuf (.pb).\n\nFlags:\n")
		fs.PrintDefaults()
	}
	var af analysisFlags
	af.register(fs)
	format := fs.String("format", "text", "output format: text or json")
	pos, err := parseArgs(fs, args)
	if err != nil {
		return err
	}
	if *format != "text" && *format != "json" {
		return usagef("--format: %q is not text or json", *format)
	}
	opts, err := af.options()
	if err != nil {
		return err
	}
	eng := engine.New(engine.Config{})
	pc, loc, name, err := af.decodeCapture(pos, stdin, eng.Limits())
	if err != nil {
		return err
	}
	resp, err := eng.AnalyzeDecoded(ctx, &kinchainv1.AnalyzeCaptureRequest{Capture: pc, Options: opts}, loc)
	if err != nil {
		return fmt.Errorf("%s: %w", name, err)
	}
	if *format == "json" {
		b, err := protojson.MarshalOptions{Multiline: true, Indent: "  ", UseProtoNames: true}.Marshal(resp)
		if err != nil {
			return err
		}
		b = append(b, '\n')
		_, err = stdout.Write(b)
		return err
	}
	return encode.WriteText(stdout, resp)
}
