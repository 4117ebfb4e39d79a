package server

import (
	"context"
	"math"
	"testing"

	"google.golang.org/protobuf/proto"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/engine"
	"github.com/kinchain/kinchain/internal/synth"
)

// TestSizeClass: every length gets a class at least as large and at most
// 25 % larger (from the smallest class up), and a class's size maps back
// to that class, so put finds the class of a slice from Get. These are
// properties of our own size classes; no outside source applies.
func TestSizeClass(t *testing.T) {
	smallest := 4 << minPoolShift
	for n := 1; n <= 7<<maxPoolShift; n += 1 + n/97 {
		c, size, ok := sizeClass(n)
		if !ok {
			t.Fatalf("n=%d: no class", n)
		}
		if size < n || n >= smallest && 4*size > 5*n || n < smallest && size != smallest {
			t.Fatalf("n=%d: class size %d", n, size)
		}
		if c2, size2, ok := sizeClass(size); !ok || c2 != c || size2 != size {
			t.Fatalf("n=%d: size %d maps to class %d size %d, not %d", n, size, c2, size2, c)
		}
		if c < 0 || c >= poolClasses {
			t.Fatalf("n=%d: class %d", n, c)
		}
	}
	if _, _, ok := sizeClass(7<<maxPoolShift + 1); ok {
		t.Error("a length past the largest class has a class")
	}
	if s := floats.Get(7<<maxPoolShift + 1); len(s) != 7<<maxPoolShift+1 {
		t.Errorf("outside the classes: len %d", len(s))
	}
}

// TestResponseOwnsItsArrays: recycling a request's arrays after its
// analysis is safe only if the response refers to none of them. Poisoning
// every request array after the analysis must leave the response, series
// included, unchanged.
func TestResponseOwnsItsArrays(t *testing.T) {
	c, _, err := synth.Generate(synth.Config{Rate: 500, Duration: 3, LeadIn: 0.5, Tail: 0.3})
	if err != nil {
		t.Fatal(err)
	}
	req := &kinchainv1.AnalyzeCaptureRequest{Capture: c, Options: &kinchainv1.AnalysisOptions{IncludeSeries: true}}
	resp, err := engine.New(engine.Config{}).Analyze(context.Background(), req)
	if err != nil {
		t.Fatal(err)
	}
	before, err := proto.Marshal(resp)
	if err != nil {
		t.Fatal(err)
	}
	for _, tr := range c.Tracks {
		for _, a := range [][]float64{tr.TimeS, tr.Qw, tr.Qx, tr.Qy, tr.Qz, tr.Gx, tr.Gy, tr.Gz, tr.Ax, tr.Ay, tr.Az, tr.Mx, tr.My, tr.Mz, tr.Px, tr.Py, tr.Pz} {
			for i := range a {
				a[i] = math.NaN()
			}
		}
	}
	after, err := proto.Marshal(resp)
	if err != nil {
		t.Fatal(err)
	}
	if len(resp.GetSegments()) == 0 || resp.GetSegments()[0].GetSeries() == nil {
		t.Fatal("no series in the response: the check would see too little")
	}
	if string(before) != string(after) {
		t.Error("the response changed with the request's arrays: it shares them")
	}
}
