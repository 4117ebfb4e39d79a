package cli

import (
	"fmt"
	"io"
	"runtime"

	"github.com/kinchain/kinchain/internal/version"
)

// RunVersion prints the build's version, commit and Go version.
func RunVersion(args []string, stdout io.Writer) error {
	if len(args) > 0 {
		return usagef("version takes no arguments")
	}
	_, err := fmt.Fprintf(stdout, "kinchain %s (commit %s, %s, %s/%s)\n",
		version.Version, version.Commit, runtime.Version(), runtime.GOOS, runtime.GOARCH)
	return err
}
