package stream

import (
	"testing"

	"gonum.org/v1/gonum/spatial/r3"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/rot"
	"github.com/kinchain/kinchain/internal/swing"
)

// Reference: the swing package, whose analysis of the window is the
// report. The live detector must decide with the same definitions, taken
// from it rather than copied: the driver is the first of swing.Drivers()
// the header declares, its swing criteria (backswing amplitude, peak speed)
// are swing.CriteriaFor(driver), and its pointer and the lead upper arm's
// are swing.PointerAxis in the sensor frame (through the header's
// mounting).
func TestDetectorUsesSwingDefinitions(t *testing.T) {
	pelvis := kinchainv1.Segment_SEGMENT_PELVIS
	arm := kinchainv1.Segment_SEGMENT_LEAD_UPPER_ARM
	drivers := swing.Drivers()
	for i, d := range drivers {
		// Every less distal driver is declared too, before d (the header's
		// order must not matter): the most distal declared one drives.
		segs := []kinchainv1.Segment{pelvis}
		for j := len(drivers) - 1; j >= i; j-- {
			segs = append(segs, drivers[j])
		}
		h := header(segs...)
		m := rot.FromAxisAngle(r3.Vec{X: 1, Y: 2, Z: 3}, 0.7)
		for range segs {
			h.Mountings = append(h.Mountings, &kinchainv1.Quaternion{W: m.Real, X: m.Imag, Y: m.Jmag, Z: m.Kmag})
		}
		s, err := NewSession(h, Limits{})
		if err != nil {
			t.Fatal(err)
		}
		if _, err := s.Push(stillBatch(0, 50, segs...)); err != nil {
			t.Fatal(err)
		}
		if s.driver < 0 || s.segs[s.driver].seg != d || s.det == nil {
			t.Fatalf("segments %v: driver %d, detector %v; want %v", segs, s.driver, s.det != nil, d)
		}
		if got, want := s.det.crit, swing.CriteriaFor(d); got != want {
			t.Errorf("%v: live criteria %+v, swing package %+v", d, got, want)
		}
		want := rot.Rotate(rot.Conj(m), swing.PointerAxis(d))
		if r3.Norm(r3.Sub(s.det.axis, want)) > 1e-12 {
			t.Errorf("%v: live pointer %v, want swing.PointerAxis in the sensor frame %v", d, s.det.axis, want)
		}
		if s.arm >= 0 {
			want := rot.Rotate(rot.Conj(m), swing.PointerAxis(arm))
			if r3.Norm(r3.Sub(s.segs[s.arm].armAxis, want)) > 1e-12 {
				t.Errorf("lead upper arm axis %v, want %v", s.segs[s.arm].armAxis, want)
			}
		}
	}
}
