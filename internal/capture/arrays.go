package capture

import kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"

// The arrays of a kinchainv1.Track, in field order, as indices into the
// result of TrackArrays.
const (
	ArrayTime = iota
	ArrayQw
	ArrayQx
	ArrayQy
	ArrayQz
	ArrayGx
	ArrayGy
	ArrayGz
	ArrayAx
	ArrayAy
	ArrayAz
	ArrayMx
	ArrayMy
	ArrayMz
	ArrayPx
	ArrayPy
	ArrayPz
	NumArrays
)

// ArrayNames are the proto field names of the arrays, by index.
var ArrayNames = [NumArrays]string{
	"time_s", "qw", "qx", "qy", "qz", "gx", "gy", "gz", "ax", "ay", "az",
	"mx", "my", "mz", "px", "py", "pz",
}

// TrackArrays returns t's arrays, indexed by the Array constants.
func TrackArrays(t *kinchainv1.Track) [NumArrays][]float64 {
	return [NumArrays][]float64{
		t.GetTimeS(), t.GetQw(), t.GetQx(), t.GetQy(), t.GetQz(),
		t.GetGx(), t.GetGy(), t.GetGz(), t.GetAx(), t.GetAy(), t.GetAz(),
		t.GetMx(), t.GetMy(), t.GetMz(), t.GetPx(), t.GetPy(), t.GetPz(),
	}
}

// SetTrackArrays stores a[k] into the matching field of t.
func SetTrackArrays(t *kinchainv1.Track, a *[NumArrays][]float64) {
	t.TimeS = a[ArrayTime]
	t.Qw, t.Qx, t.Qy, t.Qz = a[ArrayQw], a[ArrayQx], a[ArrayQy], a[ArrayQz]
	t.Gx, t.Gy, t.Gz = a[ArrayGx], a[ArrayGy], a[ArrayGz]
	t.Ax, t.Ay, t.Az = a[ArrayAx], a[ArrayAy], a[ArrayAz]
	t.Mx, t.My, t.Mz = a[ArrayMx], a[ArrayMy], a[ArrayMz]
	t.Px, t.Py, t.Pz = a[ArrayPx], a[ArrayPy], a[ArrayPz]
}
