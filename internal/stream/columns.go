package stream

import (
	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
)

// The arrays of a Track, in field order. A segment's ring stores one column
// per array it sends.
const (
	aTime = iota
	aQw
	aQx
	aQy
	aQz
	aGx
	aGy
	aGz
	aAx
	aAy
	aAz
	aMx
	aMy
	aMz
	aPx
	aPy
	aPz
	nArrays
)

// arrayNames are the proto field names of the arrays.
var arrayNames = [nArrays]string{
	"time_s", "qw", "qx", "qy", "qz", "gx", "gy", "gz", "ax", "ay", "az",
	"mx", "my", "mz", "px", "py", "pz",
}

// groups are the arrays that must be present together, with the name of the
// reading they make up.
var groups = [...]struct {
	first, n int
	what     string
}{
	{aQw, 4, "quaternion"},
	{aGx, 3, "gyroscope"},
	{aAx, 3, "accelerometer"},
	{aMx, 3, "magnetometer"},
	{aPx, 3, "position"},
}

// trackArrays returns t's arrays, indexed by the a* constants.
func trackArrays(t *kinchainv1.Track) [nArrays][]float64 {
	return [nArrays][]float64{
		t.GetTimeS(), t.GetQw(), t.GetQx(), t.GetQy(), t.GetQz(),
		t.GetGx(), t.GetGy(), t.GetGz(), t.GetAx(), t.GetAy(), t.GetAz(),
		t.GetMx(), t.GetMy(), t.GetMz(), t.GetPx(), t.GetPy(), t.GetPz(),
	}
}

// setTrackArrays stores a[k] into the matching field of t.
func setTrackArrays(t *kinchainv1.Track, a *[nArrays][]float64) {
	t.TimeS = a[aTime]
	t.Qw, t.Qx, t.Qy, t.Qz = a[aQw], a[aQx], a[aQy], a[aQz]
	t.Gx, t.Gy, t.Gz = a[aGx], a[aGy], a[aGz]
	t.Ax, t.Ay, t.Az = a[aAx], a[aAy], a[aAz]
	t.Mx, t.My, t.Mz = a[aMx], a[aMy], a[aMz]
	t.Px, t.Py, t.Pz = a[aPx], a[aPy], a[aPz]
}

// columnSet is a bit set of the arrays a segment sends (bit k: array k).
type columnSet uint32

func (c columnSet) has(k int) bool { return c&(1<<k) != 0 }

// count returns the number of arrays in c.
func (c columnSet) count() int {
	n := 0
	for k := 0; k < nArrays; k++ {
		if c.has(k) {
			n++
		}
	}
	return n
}
