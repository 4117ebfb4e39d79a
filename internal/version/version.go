// Package version holds build metadata, stamped at link time:
//
//	go build -ldflags "-X github.com/kinchain/kinchain/internal/version.Version=v1.2.3 \
//	  -X github.com/kinchain/kinchain/internal/version.Commit=$(git rev-parse --short HEAD)"
//
// When not stamped, Commit falls back to the VCS revision recorded by the Go
// toolchain, if any.
package version

import "runtime/debug"

// Version is the release version; "dev" for unstamped builds.
var Version = "dev"

// Commit is the source revision; "unknown" when neither stamped nor recorded.
var Commit = "unknown"

func init() {
	if Commit != "unknown" {
		return
	}
	if bi, ok := debug.ReadBuildInfo(); ok {
		for _, s := range bi.Settings {
			if s.Key == "vcs.revision" && s.Value != "" {
				Commit = s.Value
				if len(Commit) > 12 {
					Commit = Commit[:12]
				}
			}
		}
	}
}
