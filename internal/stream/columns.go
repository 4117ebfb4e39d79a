package stream

import "github.com/kinchain/kinchain/internal/capture"

// groups are the arrays that must be present together, with the name of the
// reading they make up.
var groups = [...]struct {
	first, n int
	what     string
}{
	{capture.ArrayQw, 4, "quaternion"},
	{capture.ArrayGx, 3, "gyroscope"},
	{capture.ArrayAx, 3, "accelerometer"},
	{capture.ArrayMx, 3, "magnetometer"},
	{capture.ArrayPx, 3, "position"},
}

// columnSet is a bit set of the arrays a segment sends (bit k: array k).
type columnSet uint32

func (c columnSet) has(k int) bool { return c&(1<<k) != 0 }

// count returns the number of arrays in c.
func (c columnSet) count() int {
	n := 0
	for k := 0; k < capture.NumArrays; k++ {
		if c.has(k) {
			n++
		}
	}
	return n
}
