// Command kinchain turns segment orientation captures from golf capture
// hardware into swing kinematics: filtered angular velocities, swing events,
// the kinematic sequence with gains, and posture summaries. See README.md.
package main

import (
	"os"

	"github.com/kinchain/kinchain/internal/cli"
)

func main() {
	os.Exit(cli.Main(os.Args[1:], os.Stdin, os.Stdout, os.Stderr))
}
