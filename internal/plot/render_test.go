package plot

import (
	"bytes"
	"errors"
	"fmt"
	"image"
	"image/png"
	"math"
	"os"
	"path/filepath"
	"strings"
	"sync"
	"testing"

	"google.golang.org/protobuf/proto"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
)

// writeArtifact saves a rendered image under $KINCHAIN_PLOT_OUT, when set,
// so a person can look at it.
func writeArtifact(t *testing.T, name string, b []byte) {
	if dir := os.Getenv("KINCHAIN_PLOT_OUT"); dir != "" {
		if err := os.WriteFile(filepath.Join(dir, name), b, 0o644); err != nil {
			t.Error(err)
		}
	}
}

func renderSVG(t *testing.T, resp *kinchainv1.AnalyzeCaptureResponse, opt Options) svgDoc {
	t.Helper()
	b, err := Render(resp, 0, opt)
	if err != nil {
		t.Fatal(err)
	}
	return parseSVG(t, b)
}

// longPaths returns the stroked paths with at least n points: the curves.
func longPaths(d svgDoc, n int) map[string]int {
	m := map[string]int{}
	for _, p := range d.Paths {
		if p.Stroke != "" && !p.Arc && len(p.Points) >= n {
			m[p.Stroke]++
		}
	}
	return m
}

func TestSVGStructure(t *testing.T) {
	resp := fixture()
	b, err := Render(resp, 0, Options{})
	if err != nil {
		t.Fatal(err)
	}
	writeArtifact(t, "fixture.svg", b)
	d := parseSVG(t, b)

	// 800 px at 0.75 pt/px, 4:5.
	if d.Width != "600pt" || d.Height != "750pt" || d.ViewBox != "0 0 600 750" {
		t.Errorf("size: width %q height %q viewBox %q, want 600pt × 750pt", d.Width, d.Height, d.ViewBox)
	}

	// One curve per segment present, in the segment's colour; the cased
	// upper-arm line adds its casing.
	want := map[string]int{hex(inkCasing): 1}
	for _, s := range fixSegments {
		want[hex(styleOf(s.seg).Color)]++
	}
	got := longPaths(d, 50)
	if fmt.Sprint(got) != fmt.Sprint(want) {
		t.Errorf("curves by stroke colour = %v, want %v", got, want)
	}

	// Axis labels carry their units.
	for _, s := range []string{"time from impact (ms)", "angular speed (deg/s)", "time from top (ms)", "Posture (deg)"} {
		if _, ok := d.text(s); !ok {
			t.Errorf("no text %q", s)
		}
	}

	// Event markers: vertical event-grey lines at the event times, read on
	// the axis recovered from the picture's own tick labels.
	ax, span := axisMap(t, d, "time from impact (ms)")
	var lineXs []float64
	for _, p := range d.Paths {
		if x, ok := p.vertical(); ok && p.Stroke == hex(inkEvent) && p.Dashed {
			if lo, hi := p.yRange(); lo >= span[0]-0.01 && hi <= span[1]+0.01 && hi-lo > 0.9*(span[1]-span[0]) {
				lineXs = append(lineXs, x)
			}
		}
	}
	var inWindow []string
	for _, e := range fixEvents {
		ms := e.rel * 1000
		x := ax.at(ms)
		name := eventName(e.kind)
		if e.kind == kinchainv1.EventKind_EVENT_KIND_ADDRESS || e.kind == kinchainv1.EventKind_EVENT_KIND_FINISH {
			// Outside the automatic window (takeaway − 84 ms .. +262 ms):
			// listed in the note under the panel instead.
			if x >= ax.at(-1200) && x <= ax.at(300) && hasLineAt(lineXs, x) {
				t.Errorf("%s (%g ms) drawn although outside the window", name, ms)
			}
			if !anyTextContains(d, name+" "+signed(ms, 0)+" ms") {
				t.Errorf("%s at %g ms is not listed as outside the window", name, ms)
			}
			continue
		}
		inWindow = append(inWindow, name)
		if !hasLineAt(lineXs, x) {
			t.Errorf("no event line for %s at %g ms (x = %.2f pt); lines at %v", name, ms, x, lineXs)
		}
		label := name
		if e.kind != kinchainv1.EventKind_EVENT_KIND_IMPACT {
			label += " " + signed(ms, 0)
		}
		if _, ok := d.text(label); !ok {
			t.Errorf("no event label %q", label)
		}
	}
	if len(lineXs) != len(inWindow) {
		t.Errorf("%d event lines, want %d (%v)", len(lineXs), len(inWindow), inWindow)
	}

	// Peaks: a dot in the segment's colour at (peak time, peak speed), and
	// the value as text.
	for _, sp := range resp.Swings[0].Sequence {
		x := ax.at((sp.PeakTimeS - fixImpactS) * 1000)
		found := false
		for _, p := range d.Paths {
			if p.Arc && p.Fill == hex(styleOf(sp.Segment).Color) && math.Abs(p.centre().X-x) < 0.01 {
				found = true
			}
		}
		if !found {
			t.Errorf("%s: no peak dot at x = %.2f pt", segmentName(sp.Segment), x)
		}
		if _, ok := d.text(fmt.Sprintf("%.0f", sp.PeakSpeedDegPerS)); !ok {
			t.Errorf("%s: peak value %.0f not shown", segmentName(sp.Segment), sp.PeakSpeedDegPerS)
		}
	}

	// Gains beside the curves.
	for _, g := range resp.Swings[0].Gains {
		name := segmentName(g.Proximal) + " → " + segmentName(g.Distal)
		if _, ok := d.text(name); !ok {
			t.Errorf("no gain row %q", name)
		}
		if _, ok := d.text(fmt.Sprintf("×%.2f", g.Ratio)); !ok {
			t.Errorf("no gain ratio ×%.2f", g.Ratio)
		}
	}

	// Transition order: a dot per segment at its time from top on the
	// transition panel's own axis, ranked in the label.
	tax, _ := axisMap(t, d, "time from top (ms)")
	for i, fs := range fixSegments {
		x := tax.at(fs.transMs)
		found := false
		for _, p := range d.Paths {
			if p.Arc && p.Fill == hex(styleOf(fs.seg).Color) && math.Abs(p.centre().X-x) < 0.01 {
				found = true
			}
		}
		if !found {
			t.Errorf("%s: no transition dot at %g ms (x = %.2f pt)", segmentName(fs.seg), fs.transMs, x)
		}
		label := signed(fs.transMs, 0) + " ms  (" + ordinal(i+1) + ")" // the fixture's transitions are in chain order
		if _, ok := d.text(label); !ok {
			t.Errorf("no transition label %q", label)
		}
	}

	// Posture table: the fixture's thorax rotation at the top.
	if _, ok := d.text("−93.8"); !ok {
		t.Error("posture table lacks the thorax's axial rotation at top (−93.8)")
	}
}

func hasLineAt(xs []float64, x float64) bool {
	for _, v := range xs {
		if math.Abs(v-x) < 0.01 {
			return true
		}
	}
	return false
}

func anyTextContains(d svgDoc, s string) bool {
	for _, t := range d.Texts {
		if strings.Contains(t.Content, s) {
			return true
		}
	}
	return false
}

func TestDecimate(t *testing.T) {
	// 5001 samples of a sharp peak over 1000 ms.
	c := curve{}
	for i := 0; i <= 5000; i++ {
		ms := float64(i) / 5
		c.Ms = append(c.Ms, ms)
		c.Speed = append(c.Speed, 1000*math.Exp(-math.Pow((ms-612.3)/4, 2))+50*math.Sin(ms))
	}
	d := c.decimate(0, 1000, 100)
	if len(d.Ms) > 2*100+2 || len(d.Ms) != len(d.Speed) {
		t.Fatalf("%d samples kept", len(d.Ms))
	}
	extremes := func(x []float64) (lo, hi float64) {
		lo, hi = math.Inf(1), math.Inf(-1)
		for _, v := range x {
			lo, hi = math.Min(lo, v), math.Max(hi, v)
		}
		return lo, hi
	}
	clo, chi := extremes(c.Speed)
	dlo, dhi := extremes(d.Speed)
	if dlo != clo || dhi != chi {
		t.Errorf("extremes changed: %v..%v → %v..%v", clo, chi, dlo, dhi)
	}
	if d.Ms[0] != 0 || d.Ms[len(d.Ms)-1] != 1000 {
		t.Errorf("ends %v..%v", d.Ms[0], d.Ms[len(d.Ms)-1])
	}
	for i := 1; i < len(d.Ms); i++ {
		if !(d.Ms[i] > d.Ms[i-1]) {
			t.Fatalf("time order broken at %d", i)
		}
	}
	// Every kept sample is an original one.
	for i, ms := range d.Ms {
		k := int(math.Round(ms * 5))
		if c.Ms[k] != ms || c.Speed[k] != d.Speed[i] {
			t.Fatalf("sample %d (%v ms) is not an original", i, ms)
		}
	}
	if s := (curve{Ms: c.Ms[:50], Speed: c.Speed[:50]}).decimate(0, 10, 100); len(s.Ms) != 50 {
		t.Errorf("short curve thinned to %d", len(s.Ms))
	}
}

func TestWindowOption(t *testing.T) {
	d := renderSVG(t, fixture(), Options{FromMs: -300, ToMs: 100})
	ax, _ := axisMap(t, d, "time from impact (ms)")
	// Takeaway (−1050 ms) and the backswing arm-level event now fall
	// outside; top (−270 ms) stays.
	if !anyTextContains(d, "takeaway −1050 ms") {
		t.Error("takeaway not listed as outside the window")
	}
	if _, ok := d.text("top −270"); !ok {
		t.Error("top label missing")
	}
	// The data area spans exactly the window.
	for _, p := range d.Paths {
		if p.Stroke == hex(styleOf(kinchainv1.Segment_SEGMENT_CLUB).Color) && len(p.Points) > 50 {
			x0, x1 := p.Points[0].X, p.Points[len(p.Points)-1].X
			if math.Abs(x0-ax.at(-300)) > 0.01 || math.Abs(x1-ax.at(100)) > 0.01 {
				t.Errorf("club curve spans x %.2f..%.2f, want %.2f..%.2f", x0, x1, ax.at(-300), ax.at(100))
			}
		}
	}
}

func TestSegmentsOption(t *testing.T) {
	d := renderSVG(t, fixture(), Options{Segments: []kinchainv1.Segment{kinchainv1.Segment_SEGMENT_CLUB, kinchainv1.Segment_SEGMENT_PELVIS}})
	got := longPaths(d, 50)
	want := map[string]int{hex(okabeBlack): 1, hex(okabeOrange): 1}
	if fmt.Sprint(got) != fmt.Sprint(want) {
		t.Errorf("curves = %v, want %v", got, want)
	}
}

// TestDefaultChain: by default the five chain links are drawn, the others
// only on request.
func TestDefaultChain(t *testing.T) {
	b, err := Render(fixtureAll(), 0, Options{})
	if err != nil {
		t.Fatal(err)
	}
	writeArtifact(t, "chain.svg", b)
	d := parseSVG(t, b)
	// Orange twice (pelvis, lead hand), casing once (lead upper arm).
	want := map[string]int{hex(okabeOrange): 2, hex(okabeReddishPurple): 1, hex(okabeYellow): 1, hex(inkCasing): 1, hex(okabeBlack): 1}
	if got := longPaths(d, 50); fmt.Sprint(got) != fmt.Sprint(want) {
		t.Errorf("curves %v, want %v", got, want)
	}
	var all []kinchainv1.Segment
	for _, sk := range fixtureAll().Segments {
		all = append(all, sk.Segment)
	}
	b, err = Render(fixtureAll(), 0, Options{Segments: all})
	if err != nil {
		t.Fatal(err)
	}
	writeArtifact(t, "all.svg", b)
	n := 0
	for _, c := range longPaths(parseSVG(t, b), 50) {
		n += c
	}
	if n != 10+2 { // ten curves and two casings
		t.Errorf("%d long paths for all ten segments, want 12", n)
	}
	if os.Getenv("KINCHAIN_PLOT_OUT") != "" {
		if pb, err := Render(fixtureAll(), 0, Options{Segments: all, Format: FormatPNG}); err == nil {
			writeArtifact(t, "all.png", pb)
		}
		if pb, err := Render(fixtureAll(), 0, Options{Format: FormatPNG}); err == nil {
			writeArtifact(t, "chain.png", pb)
		}
	}
}

func TestWidthScalesSVG(t *testing.T) {
	b, err := Render(fixture(), 0, Options{WidthPx: 1200})
	if err != nil {
		t.Fatal(err)
	}
	head := string(b[:300])
	if !strings.Contains(head, `width="900pt" height="1125pt"`) || !strings.Contains(head, `viewBox="0 0 900 1125"`) {
		t.Errorf("1200 px SVG header: %s", head)
	}
	if !strings.Contains(string(b), `transform="scale(1.5,1.5)"`) {
		t.Error("1200 px SVG is not the 800 px layout scaled by 1.5")
	}
}

// TestHostileText: control characters in names cannot break the XML, and a
// long capture id is shortened to the page.
func TestHostileText(t *testing.T) {
	r := fixture()
	r.CaptureId = "bad\x00id\x1b[31m <&> " + strings.Repeat("long-", 60)
	b, err := Render(r, 0, Options{})
	if err != nil {
		t.Fatal(err)
	}
	d := parseSVG(t, b)
	found := false
	for _, tx := range d.Texts {
		if strings.HasPrefix(tx.Content, "Swing 1 of 1 · badid[31m <&> long-") && strings.HasSuffix(tx.Content, "…") {
			found = true
		}
	}
	if !found {
		t.Error("title not sanitised and shortened")
	}
}

// TestEmbedFonts: the fonts are embedded on request, and the SVG stays XML.
func TestEmbedFonts(t *testing.T) {
	b, err := Render(fixture(), 0, Options{EmbedFonts: true})
	if err != nil {
		t.Fatal(err)
	}
	parseSVG(t, b)
	if n := bytes.Count(b, []byte("@font-face")); n != 2 { // regular and bold
		t.Errorf("%d embedded fonts, want 2", n)
	}
	plain, _ := Render(fixture(), 0, Options{})
	if bytes.Contains(plain, []byte("@font-face")) {
		t.Error("fonts embedded without EmbedFonts")
	}
	t.Logf("SVG %d bytes, with fonts %d bytes", len(plain), len(b))
}

func TestPNG(t *testing.T) {
	widths := []int{800, 1000, 433}
	if testing.Short() {
		widths = []int{800, 433}
	}
	for _, w := range widths {
		b, err := Render(fixture(), 0, Options{Format: FormatPNG, WidthPx: w})
		if err != nil {
			t.Fatal(err)
		}
		if w == 800 {
			writeArtifact(t, "fixture.png", b)
		}
		img, err := png.Decode(bytes.NewReader(b))
		if err != nil {
			t.Fatalf("width %d: not a PNG: %v", w, err)
		}
		if got := img.Bounds().Size(); got.X != w || got.Y != int(math.Round(float64(w)*pageAspect)) {
			t.Errorf("width %d: size %v", w, got)
		}
		// Each segment's colour is really drawn (more than a legend swatch).
		for _, s := range fixSegments {
			c := styleOf(s.seg).Color
			if n := countNear(img, c.R, c.G, c.B, 24); n < 150*w/800 {
				t.Errorf("width %d: %s colour %s on only %d pixels", w, segmentName(s.seg), hex(c), n)
			}
		}
	}
}

// countNear counts pixels within tol (each channel) of r, g, b.
func countNear(img image.Image, r, g, b uint8, tol int) int {
	n := 0
	bd := img.Bounds()
	for y := bd.Min.Y; y < bd.Max.Y; y++ {
		for x := bd.Min.X; x < bd.Max.X; x++ {
			cr, cg, cb, _ := img.At(x, y).RGBA()
			if abs(int(cr>>8)-int(r)) <= tol && abs(int(cg>>8)-int(g)) <= tol && abs(int(cb>>8)-int(b)) <= tol {
				n++
			}
		}
	}
	return n
}

func abs(x int) int {
	if x < 0 {
		return -x
	}
	return x
}

func TestRenderErrors(t *testing.T) {
	mod := func(f func(r *kinchainv1.AnalyzeCaptureResponse)) *kinchainv1.AnalyzeCaptureResponse {
		r := fixture()
		f(r)
		return r
	}
	cases := []struct {
		name  string
		resp  *kinchainv1.AnalyzeCaptureResponse
		swing int
		opt   Options
		field string
	}{
		{"nil response", nil, 0, Options{}, "response"},
		{"no swings", mod(func(r *kinchainv1.AnalyzeCaptureResponse) { r.Swings = nil }), 0, Options{}, "swings"},
		{"swing too large", fixture(), 1, Options{}, "swing"},
		{"swing negative", fixture(), -1, Options{}, "swing"},
		{"no impact", mod(func(r *kinchainv1.AnalyzeCaptureResponse) {
			sw := r.Swings[0]
			sw.Events = sw.Events[:5] // address .. lead arm level (down)
		}), 0, Options{}, "swings[0].events"},
		{"NaN event", mod(func(r *kinchainv1.AnalyzeCaptureResponse) { r.Swings[0].Events[3].TimeS = math.NaN() }), 0, Options{}, "swings[0].events[3].time_s"},
		{"no series", mod(func(r *kinchainv1.AnalyzeCaptureResponse) {
			for _, s := range r.Segments {
				s.Series = nil
			}
		}), 0, Options{}, "segments[].series"},
		{"one series missing", mod(func(r *kinchainv1.AnalyzeCaptureResponse) { r.Segments[2].Series = nil }), 0, Options{}, "segments[2].series"},
		{"length mismatch", mod(func(r *kinchainv1.AnalyzeCaptureResponse) {
			r.Segments[1].Series.SpeedDegPerS = r.Segments[1].Series.SpeedDegPerS[:10]
		}), 0, Options{}, "segments[1].series.speed_deg_per_s"},
		{"NaN speed", mod(func(r *kinchainv1.AnalyzeCaptureResponse) { r.Segments[0].Series.SpeedDegPerS[118] = math.NaN() }), 0, Options{}, "segments[0].series.speed_deg_per_s[118]"},
		{"time not increasing", mod(func(r *kinchainv1.AnalyzeCaptureResponse) { r.Segments[3].Series.TimeS[7] = 0 }), 0, Options{}, "segments[3].series.time_s[7]"},
		{"series miss the window", mod(func(r *kinchainv1.AnalyzeCaptureResponse) {
			for _, e := range r.Swings[0].Events {
				e.TimeS += 100
			}
		}), 0, Options{}, "segments[].series"},
		{"bad format", fixture(), 0, Options{Format: "gif"}, "format"},
		{"too narrow", fixture(), 0, Options{WidthPx: 399}, "width"},
		{"too wide", fixture(), 0, Options{WidthPx: 2401}, "width"},
		{"reversed window", fixture(), 0, Options{FromMs: 10, ToMs: -10}, "window"},
		{"segment not in response", fixture(), 0, Options{Segments: []kinchainv1.Segment{kinchainv1.Segment_SEGMENT_HEAD}}, "segments[0]"},
		{"segment twice", fixture(), 0, Options{Segments: []kinchainv1.Segment{kinchainv1.Segment_SEGMENT_CLUB, kinchainv1.Segment_SEGMENT_CLUB}}, "segments[1]"},
		{"unknown segment", fixture(), 0, Options{Segments: []kinchainv1.Segment{99}}, "segments[0]"},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			b, err := Render(tc.resp, tc.swing, tc.opt)
			var ie *InputError
			if !errors.As(err, &ie) {
				t.Fatalf("err = %v (%d bytes), want an *InputError", err, len(b))
			}
			if ie.Field != tc.field {
				t.Errorf("field = %q, want %q (%v)", ie.Field, tc.field, err)
			}
			if !strings.HasPrefix(err.Error(), tc.field+": ") {
				t.Errorf("message %q does not start with the field", err)
			}
		})
	}
}

// TestDegenerate: partial responses still draw (no panic, valid SVG).
func TestDegenerate(t *testing.T) {
	cases := map[string]func(r *kinchainv1.AnalyzeCaptureResponse){
		"no sequence": func(r *kinchainv1.AnalyzeCaptureResponse) {
			r.Swings[0].Sequence, r.Swings[0].Gains, r.Swings[0].PeakOrder = nil, nil, nil
		},
		"no transitions, postures or tempo": func(r *kinchainv1.AnalyzeCaptureResponse) {
			r.Swings[0].Transitions, r.Swings[0].Postures, r.Swings[0].Tempo = nil, nil, nil
		},
		"only impact": func(r *kinchainv1.AnalyzeCaptureResponse) {
			r.Swings[0].Events = r.Swings[0].Events[5:6]
		},
		"flat zero speeds": func(r *kinchainv1.AnalyzeCaptureResponse) {
			for _, s := range r.Segments {
				clear(s.Series.SpeedDegPerS)
			}
		},
		"two samples": func(r *kinchainv1.AnalyzeCaptureResponse) {
			for _, s := range r.Segments {
				s.Series.TimeS = []float64{1.9, 2.1}
				s.Series.SpeedDegPerS = []float64{10, 20}
			}
		},
	}
	for name, f := range cases {
		t.Run(name, func(t *testing.T) {
			r := fixture()
			f(r)
			formats := []Format{FormatSVG, FormatPNG}
			if testing.Short() {
				formats = formats[:1] // PNG rasterising is slow under -race
			}
			for _, format := range formats {
				b, err := Render(r, 0, Options{Format: format})
				if err != nil {
					t.Fatal(err)
				}
				if format == FormatSVG {
					parseSVG(t, b)
				} else if _, err := png.Decode(bytes.NewReader(b)); err != nil {
					t.Fatal(err)
				}
			}
		})
	}
	// Without a sequence every segment with a series is drawn.
	r := fixture()
	r.Swings[0].Sequence = nil
	if got := longPaths(renderSVG(t, r, Options{}), 50); len(got) != 5 {
		t.Errorf("without a sequence: curves %v, want the 4 segments and a casing", got)
	}
}

// TestRenderDoesNotModify: Render reads its input only.
func TestRenderDoesNotModify(t *testing.T) {
	r := fixture()
	before := proto.Clone(r)
	if _, err := Render(r, 0, Options{}); err != nil {
		t.Fatal(err)
	}
	if !proto.Equal(r, before) {
		t.Error("Render modified the response")
	}
}

// TestConcurrentRender: the server renders requests in parallel (run with
// -race).
func TestConcurrentRender(t *testing.T) {
	want, err := Render(fixture(), 0, Options{})
	if err != nil {
		t.Fatal(err)
	}
	var wg sync.WaitGroup
	for i := 0; i < 4; i++ {
		wg.Add(1)
		go func(i int) {
			defer wg.Done()
			f := FormatSVG
			if i == 3 {
				f = FormatPNG
			}
			b, err := Render(fixture(), 0, Options{Format: f})
			if err != nil {
				t.Error(err)
				return
			}
			if f == FormatSVG && !bytes.Equal(b, want) {
				t.Error("concurrent SVG differs from the sequential one")
			}
		}(i)
	}
	wg.Wait()
}

func BenchmarkRender(b *testing.B) {
	r := fixture()
	for _, f := range []Format{FormatSVG, FormatPNG} {
		b.Run(string(f), func(b *testing.B) {
			for b.Loop() {
				if _, err := Render(r, 0, Options{Format: f}); err != nil {
					b.Fatal(err)
				}
			}
		})
	}
}
