package plot

import (
	"bytes"
	"fmt"
	"image/color"
	"math"
	"slices"

	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
	"gonum.org/v1/plot/vg/vgimg"
	"gonum.org/v1/plot/vg/vgsvg"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
)

// Format is an output image format.
type Format string

// The output formats.
const (
	FormatSVG Format = "svg" // image/svg+xml
	FormatPNG Format = "png" // image/png
)

// ContentType returns the media type of the format.
func (f Format) ContentType() string {
	if f == FormatPNG {
		return "image/png"
	}
	return "image/svg+xml"
}

// Width bounds and default, px.
const (
	DefaultWidthPx = 800
	MinWidthPx     = 400
	MaxWidthPx     = 2400
)

// Options tune Render. The zero value draws an 800 px wide SVG of the
// segments in the swing's kinematic sequence over the automatic window.
type Options struct {
	// Format is the image format; "" means SVG.
	Format Format
	// WidthPx is the image width in pixels (default 800, allowed 400 to
	// 2400, which bounds a PNG's raster to 22 MB); the height is 1.25 × the
	// width.
	WidthPx int
	// Segments, when set, are the segments whose speed curves are drawn, in
	// this order. Default: the links of the kinetic chain the gains compare
	// (pelvis, thorax, lead upper arm, lead hand, club) that have series;
	// if none has, the segments of the swing's kinematic sequence, else
	// every segment with a series.
	Segments []kinchainv1.Segment
	// FromMs and ToMs are the time window of the speed panel relative to
	// impact, ms. Both zero: automatic, from shortly before the takeaway (or
	// the top) to 150–400 ms after impact, or just past an early finish,
	// within the series' time span.
	FromMs, ToMs float64
	// EmbedFonts embeds the Liberation Sans font files in SVG output (about
	// 1 MB) so that the text renders identically everywhere.
	EmbedFonts bool
}

// InputError is a problem with Render's input; Field names the offending
// field of the response (e.g. "swings[0].events") or option (e.g. "swing").
type InputError struct {
	Field  string
	Reason string
}

func (e *InputError) Error() string { return e.Field + ": " + e.Reason }

func inputErrorf(field, format string, a ...any) error {
	return &InputError{Field: field, Reason: fmt.Sprintf(format, a...)}
}

// Logical page size at the default width, pt; every layout length is in this
// unit and SVG output is scaled from it.
const (
	pageWidth  = vg.Length(600) // 800 px at 0.75 pt per px
	pageAspect = 1.25           // height / width
)

// Render draws swing number swing (the 0-based position in resp.Swings) of
// a response made with options.include_series = true.
//
// It fails with an *InputError when the response has no swings, the index
// is out of range, the swing has no impact event, the series are missing or
// malformed, or an option is out of range.
func Render(resp *kinchainv1.AnalyzeCaptureResponse, swing int, opt Options) ([]byte, error) {
	if err := opt.check(); err != nil {
		return nil, err
	}
	v, err := newView(resp, swing, opt)
	if err != nil {
		return nil, err
	}
	w := opt.width()
	var (
		page draw.Canvas
		buf  bytes.Buffer
	)
	switch opt.format() {
	case FormatPNG:
		// Render at the resolution that makes the image exactly w pixels
		// wide, so that text is rasterised at its final size (scaling a
		// raster canvas would blur it).
		dpi := max(int(math.Round(float64(w)*0.12)), 1)
		pw := vg.Length(float64(w) * vg.Inch.Points() / float64(dpi))
		c := vgimg.NewWith(vgimg.UseWH(pw, pw*pageAspect), vgimg.UseDPI(dpi), vgimg.UseBackgroundColor(color.White))
		page = draw.New(c)
		v.draw(page)
		if _, err := (vgimg.PngCanvas{Canvas: c}).WriteTo(&buf); err != nil {
			return nil, fmt.Errorf("plot: encoding PNG: %w", err)
		}
	default:
		pw := vg.Length(float64(w) * 0.75)
		c := vgsvg.NewWith(vgsvg.UseWH(pw, pw*pageAspect), vgsvg.EmbedFonts(opt.EmbedFonts))
		if k := float64(pw / pageWidth); k != 1 {
			c.Scale(k, k)
		}
		page = draw.Canvas{Canvas: c, Rectangle: vg.Rectangle{Max: vg.Point{X: pageWidth, Y: pageWidth * pageAspect}}}
		page.SetColor(color.White)
		page.Fill(page.Rectangle.Path())
		v.draw(page)
		if _, err := c.WriteTo(&buf); err != nil {
			return nil, fmt.Errorf("plot: encoding SVG: %w", err)
		}
	}
	return buf.Bytes(), nil
}

func (o Options) format() Format {
	if o.Format == "" {
		return FormatSVG
	}
	return o.Format
}

func (o Options) width() int {
	if o.WidthPx == 0 {
		return DefaultWidthPx
	}
	return o.WidthPx
}

// check validates the options; errors name the option.
func (o Options) check() error {
	switch o.Format {
	case "", FormatSVG, FormatPNG:
	default:
		return inputErrorf("format", "%q is not svg or png", string(o.Format))
	}
	if w := o.width(); w < MinWidthPx || w > MaxWidthPx {
		return inputErrorf("width", "%d px is outside %d..%d px", o.WidthPx, MinWidthPx, MaxWidthPx)
	}
	if !finite(o.FromMs) || !finite(o.ToMs) {
		return inputErrorf("window", "from_ms and to_ms must be finite")
	}
	if (o.FromMs != 0 || o.ToMs != 0) && !(o.FromMs < o.ToMs) {
		return inputErrorf("window", "from_ms (%g) must be before to_ms (%g)", o.FromMs, o.ToMs)
	}
	for i, s := range o.Segments {
		if _, ok := kinchainv1.Segment_name[int32(s)]; !ok || s == kinchainv1.Segment_SEGMENT_UNSPECIFIED {
			return inputErrorf(fmt.Sprintf("segments[%d]", i), "%d is not a segment", int32(s))
		}
		if slices.Contains(o.Segments[:i], s) {
			return inputErrorf(fmt.Sprintf("segments[%d]", i), "%s is listed twice", segmentName(s))
		}
	}
	return nil
}

func finite(x float64) bool { return !math.IsNaN(x) && !math.IsInf(x, 0) }

// chain is the kinetic chain drawn by default, proximal first (the links
// whose gains the swing analysis reports).
var chain = []kinchainv1.Segment{
	kinchainv1.Segment_SEGMENT_PELVIS,
	kinchainv1.Segment_SEGMENT_THORAX,
	kinchainv1.Segment_SEGMENT_LEAD_UPPER_ARM,
	kinchainv1.Segment_SEGMENT_LEAD_HAND,
	kinchainv1.Segment_SEGMENT_CLUB,
}

// curve is one segment's speed series on the plot's time axis.
type curve struct {
	Segment kinchainv1.Segment
	Ms      []float64 // time relative to impact, ms
	Speed   []float64 // deg/s
}

// mark is an event on the plot's time axis.
type mark struct {
	Kind kinchainv1.EventKind
	Ms   float64 // relative to impact
}

// view is everything drawn, extracted and checked from the response.
type view struct {
	resp     *kinchainv1.AnalyzeCaptureResponse
	sw       *kinchainv1.SwingReport
	pos      int     // position of sw in resp.Swings
	impactS  float64 // capture time of impact, s
	fromMs   float64 // speed panel window, relative to impact
	toMs     float64
	curves   []curve
	events   []mark // all events of the swing, in time order
	peaks    map[kinchainv1.Segment]*kinchainv1.SegmentPeak
	maxSpeed float64 // largest speed inside the window, deg/s
}

// newView checks the response and extracts what the picture needs.
func newView(resp *kinchainv1.AnalyzeCaptureResponse, swing int, opt Options) (*view, error) {
	if resp == nil {
		return nil, inputErrorf("response", "missing")
	}
	n := len(resp.GetSwings())
	if n == 0 {
		return nil, inputErrorf("swings", "the response has no swings, so there is nothing to plot")
	}
	if swing < 0 || swing >= n {
		return nil, inputErrorf("swing", "%d is out of range: the response has %d swing(s), 0..%d", swing, n, n-1)
	}
	sw := resp.GetSwings()[swing]
	if sw == nil {
		return nil, inputErrorf(fmt.Sprintf("swings[%d]", swing), "missing")
	}
	v := &view{resp: resp, sw: sw, pos: swing, peaks: map[kinchainv1.Segment]*kinchainv1.SegmentPeak{}}
	if err := v.readEvents(); err != nil {
		return nil, err
	}
	for i, sp := range sw.GetSequence() {
		if sp == nil {
			continue
		}
		if !finite(sp.GetPeakSpeedDegPerS()) || !finite(sp.GetPeakTimeS()) {
			return nil, inputErrorf(fmt.Sprintf("swings[%d].sequence[%d]", swing, i), "peak speed or time is not finite")
		}
		v.peaks[sp.GetSegment()] = sp
	}
	if err := v.readCurves(opt); err != nil {
		return nil, err
	}
	return v, nil
}

// readEvents finds impact and converts the events to the plot's time axis.
func (v *view) readEvents() error {
	found := false
	for i, e := range v.sw.GetEvents() {
		if !finite(e.GetTimeS()) {
			return inputErrorf(fmt.Sprintf("swings[%d].events[%d].time_s", v.pos, i), "not finite")
		}
		if e.GetKind() == kinchainv1.EventKind_EVENT_KIND_IMPACT && !found {
			v.impactS, found = e.GetTimeS(), true
		}
	}
	if !found {
		return inputErrorf(fmt.Sprintf("swings[%d].events", v.pos), "no impact event; the plot's time axis is relative to impact")
	}
	for _, e := range v.sw.GetEvents() {
		if e.GetKind() == kinchainv1.EventKind_EVENT_KIND_UNSPECIFIED {
			continue
		}
		v.events = append(v.events, mark{Kind: e.GetKind(), Ms: v.ms(e.GetTimeS())})
	}
	slices.SortStableFunc(v.events, func(a, b mark) int { return cmpFloat(a.Ms, b.Ms) })
	return nil
}

func cmpFloat(a, b float64) int {
	switch {
	case a < b:
		return -1
	case a > b:
		return 1
	}
	return 0
}

// ms converts a capture time (s) to ms relative to impact.
func (v *view) ms(t float64) float64 { return (t - v.impactS) * 1000 }

// event returns the time of the first event of a kind, relative to impact.
func (v *view) event(k kinchainv1.EventKind) (float64, bool) {
	for _, e := range v.events {
		if e.Kind == k {
			return e.Ms, true
		}
	}
	return 0, false
}

// chosenSegments returns the segments to draw and the index of each in
// resp.Segments.
func (v *view) chosenSegments(opt Options) ([]kinchainv1.Segment, map[kinchainv1.Segment]int, error) {
	index := map[kinchainv1.Segment]int{}
	withSeries := 0
	for i, sk := range v.resp.GetSegments() {
		if _, dup := index[sk.GetSegment()]; dup {
			return nil, nil, inputErrorf(fmt.Sprintf("segments[%d].segment", i), "%s appears twice", segmentName(sk.GetSegment()))
		}
		index[sk.GetSegment()] = i
		if len(sk.GetSeries().GetTimeS()) > 0 {
			withSeries++
		}
	}
	if withSeries == 0 {
		return nil, nil, inputErrorf("segments[].series", "no segment has a series; analyse with options.include_series = true")
	}
	var segs []kinchainv1.Segment
	switch {
	case len(opt.Segments) > 0:
		segs = opt.Segments
		for i, s := range segs {
			if _, ok := index[s]; !ok {
				return nil, nil, inputErrorf(fmt.Sprintf("segments[%d]", i), "%s is not in the response", segmentName(s))
			}
		}
	default:
		// The kinetic chain the gains compare, in chain order, as far as
		// the response has it (readCurves insists on its series).
		for _, s := range chain {
			if _, ok := index[s]; ok {
				segs = append(segs, s)
			}
		}
		if len(segs) == 0 {
			for _, sp := range v.sw.GetSequence() {
				if s := sp.GetSegment(); s != kinchainv1.Segment_SEGMENT_UNSPECIFIED && !slices.Contains(segs, s) {
					segs = append(segs, s)
				}
			}
		}
		if len(segs) == 0 {
			for _, sk := range v.resp.GetSegments() {
				if len(sk.GetSeries().GetTimeS()) > 0 {
					segs = append(segs, sk.GetSegment())
				}
			}
		}
	}
	return segs, index, nil
}

// readCurves checks the chosen segments' series, sets the window and cuts
// the series to it.
func (v *view) readCurves(opt Options) error {
	segs, index, err := v.chosenSegments(opt)
	if err != nil {
		return err
	}
	t0, t1 := math.Inf(1), math.Inf(-1)
	full := make([]curve, 0, len(segs))
	for _, s := range segs {
		i, ok := index[s]
		if !ok {
			return inputErrorf("segments", "%s (in swings[%d].sequence) is not in the response", segmentName(s), v.pos)
		}
		field := fmt.Sprintf("segments[%d].series", i)
		ser := v.resp.GetSegments()[i].GetSeries()
		ts, sp := ser.GetTimeS(), ser.GetSpeedDegPerS()
		switch {
		case len(ts) == 0:
			return inputErrorf(field, "absent for %s; analyse with options.include_series = true", segmentName(s))
		case len(sp) != len(ts):
			return inputErrorf(field+".speed_deg_per_s", "%d values for %d times", len(sp), len(ts))
		}
		c := curve{Segment: s, Ms: make([]float64, len(ts)), Speed: sp}
		for k, t := range ts {
			if !finite(t) {
				return inputErrorf(fmt.Sprintf("%s.time_s[%d]", field, k), "not finite")
			}
			if k > 0 && !(t > ts[k-1]) {
				return inputErrorf(fmt.Sprintf("%s.time_s[%d]", field, k), "not after the previous sample")
			}
			if !finite(sp[k]) {
				return inputErrorf(fmt.Sprintf("%s.speed_deg_per_s[%d]", field, k), "not finite")
			}
			c.Ms[k] = v.ms(t)
		}
		t0, t1 = math.Min(t0, c.Ms[0]), math.Max(t1, c.Ms[len(ts)-1])
		full = append(full, c)
	}
	v.window(opt, t0, t1)
	if !(v.fromMs < v.toMs) {
		return inputErrorf("segments[].series", "the series (%.0f..%.0f ms from impact) do not overlap the plot window", t0, t1)
	}
	for _, c := range full {
		v.curves = append(v.curves, c.cut(v.fromMs, v.toMs).decimate(v.fromMs, v.toMs, curveBuckets))
	}
	for _, c := range v.curves {
		for k, s := range c.Speed {
			if c.Ms[k] >= v.fromMs && c.Ms[k] <= v.toMs {
				v.maxSpeed = math.Max(v.maxSpeed, s)
			}
		}
	}
	for _, s := range segs {
		if p, ok := v.peaks[s]; ok {
			if t := v.ms(p.GetPeakTimeS()); t >= v.fromMs && t <= v.toMs {
				v.maxSpeed = math.Max(v.maxSpeed, p.GetPeakSpeedDegPerS())
			}
		}
	}
	return nil
}

// window sets the speed panel's time window: the requested one, or from a
// margin before the takeaway (else the lead arm level in the backswing, else
// the top) to a margin after impact (25 % of the takeaway-to-impact span,
// 150 to 400 ms) or after the finish when that comes within half the span
// (at least 400 ms); clipped to the series span [t0, t1].
func (v *view) window(opt Options, t0, t1 float64) {
	if opt.FromMs != 0 || opt.ToMs != 0 {
		v.fromMs, v.toMs = math.Max(opt.FromMs, t0), math.Min(opt.ToMs, t1)
		return
	}
	start := -1000.0
	for _, k := range []kinchainv1.EventKind{
		kinchainv1.EventKind_EVENT_KIND_TAKEAWAY,
		kinchainv1.EventKind_EVENT_KIND_LEAD_ARM_LEVEL_BACKSWING,
		kinchainv1.EventKind_EVENT_KIND_TOP,
	} {
		if t, ok := v.event(k); ok && t < 0 {
			start = t
			break
		}
	}
	span := -start
	from := start - math.Max(0.08*span, 50)
	to := math.Min(math.Max(0.25*span, 150), 400)
	// A finish soon after impact is shown too.
	if f, ok := v.event(kinchainv1.EventKind_EVENT_KIND_FINISH); ok && f > 0 && f <= math.Max(0.5*span, 400) {
		to = math.Max(to, f+math.Max(0.05*span, 30))
	}
	v.fromMs, v.toMs = math.Max(from, t0), math.Min(to, t1)
}

// curveBuckets is the number of time buckets a drawn curve keeps at most
// two samples of: about one per point of the speed panel's width, finer than
// the eye resolves at any allowed size.
const curveBuckets = 400

// decimate thins a curve to at most the minimum and the maximum sample of
// each of n equal time buckets spanning [from, to], in time order, keeping
// the first and last samples (min-max decimation: the drawn envelope and
// every peak stay exact). Curves with at most 2n+2 samples are returned as
// they are.
func (c curve) decimate(from, to float64, n int) curve {
	if len(c.Ms) <= 2*n+2 || !(to > from) {
		return c
	}
	out := curve{Segment: c.Segment, Ms: []float64{c.Ms[0]}, Speed: []float64{c.Speed[0]}}
	add := func(i int) {
		if last := len(out.Ms) - 1; out.Ms[last] == c.Ms[i] {
			return
		}
		out.Ms = append(out.Ms, c.Ms[i])
		out.Speed = append(out.Speed, c.Speed[i])
	}
	width := (to - from) / float64(n)
	for i := 1; i < len(c.Ms)-1; {
		b := math.Floor((c.Ms[i] - from) / width)
		lo, hi := i, i
		j := i
		for ; j < len(c.Ms)-1 && math.Floor((c.Ms[j]-from)/width) == b; j++ {
			if c.Speed[j] < c.Speed[lo] {
				lo = j
			}
			if c.Speed[j] > c.Speed[hi] {
				hi = j
			}
		}
		add(min(lo, hi))
		add(max(lo, hi))
		i = j
	}
	add(len(c.Ms) - 1)
	return out
}

// cut keeps the samples inside [from, to] plus one on each side, so the
// line reaches the plot's edges (the plotter clips it there).
func (c curve) cut(from, to float64) curve {
	lo, _ := slices.BinarySearch(c.Ms, from)
	hi, _ := slices.BinarySearch(c.Ms, to)
	lo = max(lo-1, 0)
	hi = min(hi+1, len(c.Ms))
	return curve{Segment: c.Segment, Ms: c.Ms[lo:hi], Speed: c.Speed[lo:hi]}
}
