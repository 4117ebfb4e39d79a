package engine

import (
	"context"
	"math"
	"testing"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/synth"
)

// TestSensorRanges: fused tracks are checked against the configured
// sensor ranges. The model golfer's raw club gyroscope turns faster than
// 2000 °/s on some axis and its accelerometer reads more than 16 g, the
// defaults (the widest common consumer IMU full scales: common practice,
// no source); the rule is "a reading at 99 % of the range or more"
// (DEVELOPERS.md, Fusion), so the expected findings follow from the
// readings themselves, computed here from the capture: saturation and
// clipping at the defaults, neither once the options give a club
// sensor's wider ranges (4000 °/s and 200 g, invented for the test).
func TestSensorRanges(t *testing.T) {
	c, _, err := synth.Generate(synth.Config{IMU: true, OmitQuaternions: true, Segments: []kinchainv1.Segment{
		kinchainv1.Segment_SEGMENT_PELVIS, kinchainv1.Segment_SEGMENT_THORAX, kinchainv1.Segment_SEGMENT_CLUB,
	}})
	if err != nil {
		t.Fatal(err)
	}
	var club *kinchainv1.Track
	for _, tr := range c.Tracks {
		if tr.Segment == kinchainv1.Segment_SEGMENT_CLUB {
			club = tr
		}
	}
	maxAbs := func(arrays ...[]float64) float64 {
		m := 0.0
		for _, a := range arrays {
			for _, v := range a {
				m = math.Max(m, math.Abs(v))
			}
		}
		return m
	}
	gyroDps := maxAbs(club.Gx, club.Gy, club.Gz) * 180 / math.Pi
	accelG := maxAbs(club.Ax, club.Ay, club.Az) / 9.80665
	if gyroDps < 0.99*2000 || gyroDps >= 0.99*4000 || accelG < 0.99*16 || accelG >= 0.99*200 {
		t.Fatalf("club peaks %.0f °/s, %.1f g: the check needs 1980–3960 °/s and 15.8–198 g", gyroDps, accelG)
	}
	findings := func(o *kinchainv1.AnalysisOptions) (sat, clip bool) {
		t.Helper()
		resp, err := New(Config{}).Analyze(context.Background(), &kinchainv1.AnalyzeCaptureRequest{Capture: c, Options: o})
		if err != nil {
			t.Fatal(err)
		}
		for _, q := range resp.GetQuality().GetTracks() {
			if q.GetSegment() == kinchainv1.Segment_SEGMENT_CLUB {
				if !q.GetFused() {
					t.Fatal("the club track was not fused")
				}
				return q.GetGyroSaturationSuspected(), q.GetAccelClippingSuspected()
			}
		}
		t.Fatal("no quality for the club")
		return
	}
	if sat, clip := findings(nil); !sat || !clip {
		t.Errorf("default ranges: saturation %v, clipping %v; want both (%.0f °/s, %.1f g)", sat, clip, gyroDps, accelG)
	}
	if sat, clip := findings(&kinchainv1.AnalysisOptions{GyroRangeDps: 4000, AccelRangeG: 200}); sat || clip {
		t.Errorf("4000 °/s, 200 g: saturation %v, clipping %v; want neither", sat, clip)
	}
	if sat, clip := findings(&kinchainv1.AnalysisOptions{GyroRangeDps: 4000}); sat || !clip {
		t.Errorf("4000 °/s, default 16 g: saturation %v, clipping %v; want clipping only", sat, clip)
	}
}
