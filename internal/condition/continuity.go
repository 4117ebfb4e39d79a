package condition

import (
	"gonum.org/v1/gonum/num/quat"

	"github.com/kinchain/kinchain/internal/rot"
)

// Continuity makes q hemisphere-continuous in place: it negates q[i]
// whenever q[i−1]·q[i] < 0 (after q[i−1] itself was fixed), so that
// neighbouring quaternions lie in the same hemisphere of the unit sphere.
// q and −q are the same rotation; differencing and interpolation need the
// shorter arc. It returns the number of samples negated.
func Continuity(q []quat.Number) (flips int) {
	for i := 1; i < len(q); i++ {
		if rot.Dot(q[i-1], q[i]) < 0 {
			q[i] = rot.Neg(q[i])
			flips++
		}
	}
	return flips
}
