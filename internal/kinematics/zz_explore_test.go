package kinematics

import (
	"fmt"
	"testing"

	"github.com/kinchain/kinchain/internal/condition"
	"github.com/kinchain/kinchain/internal/synth"
	"github.com/kinchain/kinchain/internal/validate"
)

func TestZZExplore(t *testing.T) {
	for _, noise := range []float64{0, 0.2} {
		pc, tr, err := synth.Generate(synth.Config{NoiseDeg: noise})
		if err != nil {
			t.Fatal(err)
		}
		c, err := validate.Capture(pc, validate.Limits{}, nil)
		if err != nil {
			t.Fatal(err)
		}
		cond, err := condition.Run(c, condition.Options{})
		if err != nil {
			t.Fatal(err)
		}
		res, err := Compute(cond, Options{Residual: true})
		if err != nil {
			t.Fatal(err)
		}
		def, _ := Compute(cond, Options{})
		sw := tr.Swings[0]
		for k := range res.Segments {
			s := &res.Segments[k]
			p := sw.Peaks[s.Segment]
			lo, hi := int((sw.Top-0.3-res.Grid.Start)*res.Grid.Rate), int((sw.Impact+0.1-res.Grid.Start)*res.Grid.Rate)
			pk, _ := PeakSpeedIn(s, lo, hi)
			pd, _ := PeakSpeedIn(&def.Segments[k], lo, hi)
			fmt.Printf("noise %.1f %-28s cutoff %7.2f Hz  peak %7.1f truth %7.1f err %+6.2f%%  (default %+6.2f%%)\n", noise, s.Segment, s.Cutoff, pk.Value*57.29577951308232, p.SpeedDegPerS, 100*(pk.Value*57.29577951308232/p.SpeedDegPerS-1), 100*(pd.Value*57.29577951308232/p.SpeedDegPerS-1))
		}
	}
}
