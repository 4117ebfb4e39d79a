// Package cli implements the kinchain command's subcommands. Each subcommand
// parses its flags, builds the components it needs and calls the same engine
// entry point the server uses; no analysis logic lives here.
package cli

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"io"
	"os"
	"os/signal"
	"strings"
	"syscall"
)

const usage = `kinchain turns segment orientation captures into swing kinematics.

Usage:
  kinchain <command> [flags] [args]

Commands:
  analyze   analyse a capture file (or the built-in demo) and print the report
  synth     write a synthetic capture of the model golfer
  fuse      estimate orientations from raw IMU columns and print a capture CSV
  plot      draw a swing as SVG or PNG
  serve     run the gRPC service, JSON gateway and metrics
  stream    replay a capture over the streaming API and print events live
  version   print version information

Run 'kinchain <command> -h' for a command's flags.
`

// Main runs the command line args (without the program name) and returns
// the process exit code: 0 on success, 1 on failure, 2 on a usage error.
func Main(args []string, stdin io.Reader, stdout, stderr io.Writer) int {
	if len(args) == 0 {
		fmt.Fprint(stderr, usage)
		return 2
	}
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt, syscall.SIGTERM)
	defer stop()
	cmd, rest := args[0], args[1:]
	var err error
	switch cmd {
	case "analyze":
		err = RunAnalyze(ctx, rest, stdin, stdout, stderr)
	case "synth":
		err = RunSynth(ctx, rest, stdout, stderr)
	case "fuse":
		err = RunFuse(ctx, rest, stdin, stdout, stderr)
	case "plot":
		err = RunPlot(ctx, rest, stdin, stdout, stderr)
	case "serve":
		err = RunServe(ctx, rest, stdout, stderr)
	case "stream":
		err = RunStream(ctx, rest, stdin, stdout, stderr)
	case "version":
		err = RunVersion(rest, stdout)
	case "help", "-h", "--help":
		fmt.Fprint(stdout, usage)
		return 0
	default:
		fmt.Fprintf(stderr, "kinchain: unknown command %q\n\n%s", cmd, usage)
		return 2
	}
	switch {
	case err == nil:
		return 0
	case errors.Is(err, flag.ErrHelp):
		return 0
	case isUsage(err):
		fmt.Fprintf(stderr, "kinchain %s: %v\n", cmd, err)
		return 2
	default:
		fmt.Fprintf(stderr, "kinchain %s: %v\n", cmd, err)
		return 1
	}
}

// usageError marks a mistake in the command line itself.
type usageError struct{ msg string }

func (e *usageError) Error() string { return e.msg }

func usagef(format string, a ...any) error { return &usageError{fmt.Sprintf(format, a...)} }

func isUsage(err error) bool {
	var u *usageError
	return errors.As(err, &u)
}

// parseArgs parses flags that may appear before or after positional
// arguments ("kinchain analyze file.csv --format json") and returns the
// positional ones. "--" ends flag parsing.
func parseArgs(fs *flag.FlagSet, args []string) ([]string, error) {
	var pos []string
	for {
		if err := fs.Parse(args); err != nil {
			if errors.Is(err, flag.ErrHelp) {
				return nil, err
			}
			return nil, usagef("%v", err)
		}
		args = fs.Args()
		if len(args) == 0 {
			return pos, nil
		}
		if args[0] == "--" {
			return append(pos, args[1:]...), nil
		}
		pos = append(pos, args[0])
		args = args[1:]
		if len(args) > 0 && !strings.HasPrefix(args[0], "-") {
			continue
		}
	}
}
