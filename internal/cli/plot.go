package cli

import (
	"context"
	"errors"
	"flag"
	"io"
	"os"
	"path/filepath"
	"strings"

	"github.com/kinchain/kinchain/internal/engine"
	"github.com/kinchain/kinchain/internal/plot"
)

// RunPlot implements `kinchain plot [flags] FILE|-`: analyse one capture
// (with the same inputs and analysis flags as analyze; the series are always
// computed) and draw one swing as SVG or PNG.
func RunPlot(ctx context.Context, args []string, stdin io.Reader, stdout, stderr io.Writer) error {
	fs := flag.NewFlagSet("plot", flag.ContinueOnError)
	fs.SetOutput(stderr)
	fs.Usage = func() {
		io.WriteString(stderr, "Usage: kinchain plot [flags] FILE|-   (or --demo)\n\n"+
			"Draws one swing of the capture: segment speeds against time from impact with the\n"+
			"events and peaks marked, gains, transition order and posture.\n"+
			"FILE is a capture in CSV (.csv), protojson (.json) or binary protobuf (.pb).\n\nFlags:\n")
		fs.PrintDefaults()
	}
	var af analysisFlags
	af.register(fs)
	format := fs.String("format", "", "image format: svg or png (default: from --out's extension, else svg)")
	swing := fs.Int("swing", 0, "0-based index of the swing to draw")
	out := fs.String("out", "", "write the image to this file instead of standard output")
	width := fs.Int("width", plot.DefaultWidthPx, "image width in pixels (400 to 2400; height is 1.25 × width)")
	fromMs := fs.Float64("from-ms", 0, "start of the speed panel's window, ms relative to impact (with --to-ms; default automatic)")
	toMs := fs.Float64("to-ms", 0, "end of the speed panel's window, ms relative to impact (with --from-ms)")
	segments := fs.String("segments", "", "comma-separated segments to draw, e.g. pelvis,thorax,lead_upper_arm,club (default: the swing's kinematic sequence)")
	embed := fs.Bool("embed-fonts", false, "embed the fonts in SVG output (about 1 MB) so it renders identically everywhere")
	pos, err := parseArgs(fs, args)
	if err != nil {
		return err
	}

	opt := plot.Options{WidthPx: *width, EmbedFonts: *embed}
	switch f := strings.ToLower(*format); {
	case f == "svg", f == "png":
		opt.Format = plot.Format(f)
	case f == "":
		opt.Format = plot.FormatSVG
		if strings.EqualFold(filepath.Ext(*out), ".png") {
			opt.Format = plot.FormatPNG
		}
	default:
		return usagef("--format: %q is not svg or png", *format)
	}
	set := map[string]bool{}
	fs.Visit(func(f *flag.Flag) { set[f.Name] = true })
	if set["from-ms"] != set["to-ms"] {
		return usagef("--from-ms and --to-ms go together")
	}
	opt.FromMs, opt.ToMs = *fromMs, *toMs
	if *segments != "" {
		segs, err := plot.ParseSegments(*segments)
		if err != nil {
			return usagef("--segments: %v", err)
		}
		opt.Segments = segs
	}
	if *swing < 0 {
		return usagef("--swing: %d is negative", *swing)
	}
	opts, err := af.options()
	if err != nil {
		return err
	}
	opts.IncludeSeries = true

	eng := engine.New(engine.Config{})
	c, err := af.readCapture(pos, stdin, eng.Limits())
	if err != nil {
		return err
	}
	resp, err := eng.AnalyzeValidated(ctx, c, opts)
	if err != nil {
		return err
	}
	img, err := plot.Render(resp, *swing, opt)
	if err != nil {
		var ie *plot.InputError
		if errors.As(err, &ie) {
			switch ie.Field {
			case "swing":
				return usagef("--swing: %s", ie.Reason)
			case "width":
				return usagef("--width: %s", ie.Reason)
			case "window":
				return usagef("--from-ms/--to-ms: %s", ie.Reason)
			}
		}
		return err
	}
	if *out == "" || *out == "-" {
		_, err = stdout.Write(img)
		return err
	}
	return writeFileAtomic(*out, img)
}

// writeFileAtomic writes b to name through a temporary file in the same
// directory, so a failed run never leaves a half-written image.
func writeFileAtomic(name string, b []byte) error {
	f, err := os.CreateTemp(filepath.Dir(name), "."+filepath.Base(name)+".*")
	if err != nil {
		return err
	}
	tmp := f.Name()
	if _, err := f.Write(b); err != nil {
		f.Close()
		os.Remove(tmp)
		return err
	}
	if err := f.Close(); err != nil {
		os.Remove(tmp)
		return err
	}
	if err := os.Chmod(tmp, 0o644); err != nil {
		os.Remove(tmp)
		return err
	}
	if err := os.Rename(tmp, name); err != nil {
		os.Remove(tmp)
		return err
	}
	return nil
}
