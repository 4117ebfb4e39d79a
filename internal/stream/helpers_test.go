package stream

import (
	"context"
	"fmt"
	"math"
	"strings"
	"testing"

	"google.golang.org/protobuf/proto"
	"google.golang.org/protobuf/reflect/protoreflect"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/engine"
)

// replayed is what a stream sent back.
type replayed struct {
	events  []*kinchainv1.StreamEvent
	reports []*kinchainv1.SwingReport
	summary *kinchainv1.StreamSummary
	// order lists the responses' kinds in the order sent ("event",
	// "swing", "summary").
	order []string
}

// replay streams capture c with options opts through a new session in
// batches of span s.
func replay(t testing.TB, c *kinchainv1.Capture, opts *kinchainv1.AnalysisOptions, span float64, lim Limits) replayed {
	t.Helper()
	h, err := HeaderFor(c, opts)
	if err != nil {
		t.Fatal(err)
	}
	s, err := NewSession(h, lim)
	if err != nil {
		t.Fatalf("header: %v", err)
	}
	var r replayed
	take := func(out []*kinchainv1.StreamCaptureResponse) {
		for _, m := range out {
			switch {
			case m.GetEvent() != nil:
				r.events = append(r.events, m.GetEvent())
				r.order = append(r.order, "event")
			case m.GetSwing() != nil:
				r.reports = append(r.reports, m.GetSwing())
				r.order = append(r.order, "swing")
			case m.GetSummary() != nil:
				r.summary = m.GetSummary()
				r.order = append(r.order, "summary")
			default:
				t.Fatalf("empty response %v", m)
			}
		}
	}
	if err := Split(c, span, func(b *kinchainv1.SampleBatch, _ float64) error {
		out, err := s.Push(b)
		take(out)
		return err
	}); err != nil {
		t.Fatalf("push: %v", err)
	}
	take(s.Close())
	return r
}

// unary analyses c as AnalyzeCapture does.
func unary(t testing.TB, c *kinchainv1.Capture, opts *kinchainv1.AnalysisOptions) *kinchainv1.AnalyzeCaptureResponse {
	t.Helper()
	resp, err := engine.New(engine.Config{}).Analyze(context.Background(),
		&kinchainv1.AnalyzeCaptureRequest{Capture: proto.Clone(c).(*kinchainv1.Capture), Options: opts})
	if err != nil {
		t.Fatalf("unary: %v", err)
	}
	return resp
}

// tolerance bounds the differences between two reports, by the unit the
// field's name ends in.
type tolerance struct {
	timeS     float64 // fields in s (and ms, scaled)
	deg       float64 // angles, degrees
	speedRel  float64 // speeds in deg/s, relative to the larger
	ratioRel  float64 // ratios and percentages, relative (percent: absolute points)
	pctPoints float64
}

// exact is the tolerance for streams whose window analysis sees the very
// samples the unary one does: only rounding differs.
var exact = tolerance{timeS: 1e-9, deg: 1e-7, speedRel: 1e-9, ratioRel: 1e-9, pctPoints: 1e-7}

// diff is the largest difference found per unit class, for reporting.
type diff struct{ timeS, deg, speedRel, ratioRel, pct float64 }

func (d *diff) max(o diff) {
	d.timeS = math.Max(d.timeS, o.timeS)
	d.deg = math.Max(d.deg, o.deg)
	d.speedRel = math.Max(d.speedRel, o.speedRel)
	d.ratioRel = math.Max(d.ratioRel, o.ratioRel)
	d.pct = math.Max(d.pct, o.pct)
}

func (d diff) String() string {
	return fmt.Sprintf("times %.3g s, angles %.3g°, speeds %.3g (relative), ratios %.3g (relative), percentages %.3g points",
		d.timeS, d.deg, d.speedRel, d.ratioRel, d.pct)
}

// compareMessages walks a and b field by field: every non-float field must
// be equal, float fields within tol by their unit. It returns the mismatches
// and the largest differences.
func compareMessages(path string, a, b protoreflect.Message, tol tolerance, out *[]string, d *diff) {
	fields := a.Descriptor().Fields()
	for i := 0; i < fields.Len(); i++ {
		f := fields.Get(i)
		p := path + "." + string(f.Name())
		// Presence matters for messages and optional fields; a proto3
		// scalar is "absent" exactly when it is zero, which the value
		// comparison covers.
		if (f.HasPresence() || f.Kind() == protoreflect.MessageKind) && !f.IsList() && a.Has(f) != b.Has(f) {
			*out = append(*out, fmt.Sprintf("%s: present %v vs %v", p, a.Has(f), b.Has(f)))
			continue
		}
		va, vb := a.Get(f), b.Get(f)
		switch {
		case f.IsList():
			la, lb := va.List(), vb.List()
			if la.Len() != lb.Len() {
				*out = append(*out, fmt.Sprintf("%s: %d entries vs %d", p, la.Len(), lb.Len()))
				continue
			}
			for j := 0; j < la.Len(); j++ {
				compareValue(fmt.Sprintf("%s[%d]", p, j), f, la.Get(j), lb.Get(j), tol, out, d)
			}
		case f.IsMap():
			*out = append(*out, p+": maps not compared")
		default:
			compareValue(p, f, va, vb, tol, out, d)
		}
	}
}

func compareValue(p string, f protoreflect.FieldDescriptor, va, vb protoreflect.Value, tol tolerance, out *[]string, d *diff) {
	switch f.Kind() {
	case protoreflect.MessageKind:
		compareMessages(p, va.Message(), vb.Message(), tol, out, d)
	case protoreflect.DoubleKind, protoreflect.FloatKind:
		x, y := va.Float(), vb.Float()
		name := string(f.Name())
		ad := math.Abs(x - y)
		rel := ad / math.Max(1e-12, math.Max(math.Abs(x), math.Abs(y)))
		var bad bool
		switch {
		case strings.HasSuffix(name, "_deg_per_s"):
			d.speedRel = math.Max(d.speedRel, rel)
			bad = rel > tol.speedRel && ad > 1e-6
		case strings.HasSuffix(name, "_ms"):
			d.timeS = math.Max(d.timeS, ad/1000)
			bad = ad > 1000*tol.timeS
		case strings.HasSuffix(name, "_s"):
			d.timeS = math.Max(d.timeS, ad)
			bad = ad > tol.timeS
		case strings.HasSuffix(name, "_deg"):
			d.deg = math.Max(d.deg, ad)
			bad = ad > tol.deg
		case strings.HasSuffix(name, "_pct"):
			d.pct = math.Max(d.pct, ad)
			bad = ad > tol.pctPoints
		default: // ratios
			d.ratioRel = math.Max(d.ratioRel, rel)
			bad = rel > tol.ratioRel
		}
		if bad {
			*out = append(*out, fmt.Sprintf("%s: %.9g vs %.9g", p, x, y))
		}
	default:
		if !va.Equal(vb) {
			*out = append(*out, fmt.Sprintf("%s: %v vs %v", p, va, vb))
		}
	}
}

// compareReports fails t when the streamed reports differ from the unary
// ones beyond tol and returns the largest differences.
func compareReports(t *testing.T, got, want []*kinchainv1.SwingReport, tol tolerance) diff {
	t.Helper()
	var d diff
	if len(got) != len(want) {
		t.Fatalf("%d streamed reports, %d unary", len(got), len(want))
	}
	for i := range got {
		var bad []string
		compareMessages(fmt.Sprintf("swing[%d]", i), got[i].ProtoReflect(), want[i].ProtoReflect(), tol, &bad, &d)
		for _, b := range bad {
			t.Error(b)
		}
	}
	return d
}
