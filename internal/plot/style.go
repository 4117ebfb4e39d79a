package plot

import (
	"image/color"
	"math"
	"strconv"
	"strings"

	xfont "golang.org/x/image/font"
	"gonum.org/v1/plot"
	"gonum.org/v1/plot/font"
	"gonum.org/v1/plot/text"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/encode"
)

// The colours of the Okabe–Ito palette (Okabe & Ito 2008, "Color Universal
// Design") that kinchain uses; its sky blue, blue and vermillion are left
// out (see the package comment).
var (
	okabeOrange        = rgb(0xE6, 0x9F, 0x00)
	okabeBluishGreen   = rgb(0x00, 0x9E, 0x73)
	okabeYellow        = rgb(0xF0, 0xE4, 0x42)
	okabeReddishPurple = rgb(0xCC, 0x79, 0xA7)
	okabeBlack         = rgb(0x00, 0x00, 0x00)
)

// Neutral inks for everything that is not a segment.
var (
	inkText   = rgb(0x1A, 0x1A, 0x1A) // body text
	inkMuted  = rgb(0x59, 0x59, 0x59) // secondary text
	inkEvent  = rgb(0x80, 0x80, 0x80) // event lines
	inkCasing = rgb(0x33, 0x33, 0x33) // outline of cased (light) lines and of peak dots
	inkGrid   = rgb(0xE6, 0xE6, 0xE6) // grid lines
	inkRule   = rgb(0xBF, 0xBF, 0xBF) // table rules, panel frames
	inkBand   = rgb(0xF4, 0xF4, 0xF4) // alternate table rows
)

func rgb(r, g, b uint8) color.RGBA { return color.RGBA{R: r, G: g, B: b, A: 0xFF} }

// segmentStyle is how one segment is drawn: its colour, dash pattern and,
// for light colours, a dark casing under the line.
type segmentStyle struct {
	Color  color.RGBA
	Dashes []vg.Length
	Cased  bool
}

const (
	lineWidth   = vg.Length(1.8) // segment lines, pt
	casingWidth = vg.Length(3.4) // casing under a cased line, pt
	casedWidth  = vg.Length(2.4) // the light line on top of its casing, pt
)

var (
	dashSolid      []vg.Length
	dashDashed     = []vg.Length{6, 2.5}
	dashLong       = []vg.Length{10, 3}
	dashDotted     = []vg.Length{1.5, 2}
	dashDashDot    = []vg.Length{7, 2, 1.5, 2}
	dashDashDotDot = []vg.Length{7, 2, 1.5, 2, 1.5, 2}
)

// segmentStyles maps every segment to its style; see the package comment
// for the reasoning behind the choice.
var segmentStyles = map[kinchainv1.Segment]segmentStyle{
	kinchainv1.Segment_SEGMENT_PELVIS:          {Color: okabeOrange, Dashes: dashSolid},
	kinchainv1.Segment_SEGMENT_THORAX:          {Color: okabeReddishPurple, Dashes: dashDashed},
	kinchainv1.Segment_SEGMENT_LEAD_UPPER_ARM:  {Color: okabeYellow, Dashes: dashSolid, Cased: true},
	kinchainv1.Segment_SEGMENT_CLUB:            {Color: okabeBlack, Dashes: dashDashDot},
	kinchainv1.Segment_SEGMENT_LEAD_FOREARM:    {Color: okabeReddishPurple, Dashes: dashDotted},
	kinchainv1.Segment_SEGMENT_LEAD_HAND:       {Color: okabeOrange, Dashes: dashDashDotDot},
	kinchainv1.Segment_SEGMENT_HEAD:            {Color: okabeBluishGreen, Dashes: dashDotted},
	kinchainv1.Segment_SEGMENT_TRAIL_UPPER_ARM: {Color: okabeOrange, Dashes: dashLong},
	kinchainv1.Segment_SEGMENT_TRAIL_FOREARM:   {Color: okabeBlack, Dashes: dashDotted},
	kinchainv1.Segment_SEGMENT_TRAIL_HAND:      {Color: okabeYellow, Dashes: dashDotted, Cased: true},
}

// styleOf returns the style of a segment (a neutral grey for an unknown one).
func styleOf(s kinchainv1.Segment) segmentStyle {
	if st, ok := segmentStyles[s]; ok {
		return st
	}
	return segmentStyle{Color: inkMuted, Dashes: dashDotted}
}

// lines returns the strokes that draw the segment, bottom first.
func (s segmentStyle) lines() []draw.LineStyle {
	if s.Cased {
		return []draw.LineStyle{
			{Color: inkCasing, Width: casingWidth, Dashes: s.Dashes},
			{Color: s.Color, Width: casedWidth, Dashes: s.Dashes},
		}
	}
	return []draw.LineStyle{{Color: s.Color, Width: lineWidth, Dashes: s.Dashes}}
}

// segmentName is the display name of a segment: "lead upper arm", as in
// the text report.
func segmentName(s kinchainv1.Segment) string { return encode.SegmentLabel(s) }

// eventName is the display name of an event kind, as in the text report.
func eventName(k kinchainv1.EventKind) string { return encode.EventLabel(k) }

// Type sizes, pt.
const (
	sizeTitle   = vg.Length(13)
	sizeHeading = vg.Length(9)
	sizeLabel   = vg.Length(9)
	sizeTick    = vg.Length(8)
	sizeNote    = vg.Length(8)
)

// The typeface: Liberation Sans, which gonum/plot ships and registers.
var (
	sans     = font.Font{Typeface: "Liberation", Variant: "Sans"}
	sansBold = font.Font{Typeface: "Liberation", Variant: "Sans", Weight: xfont.WeightBold}
)

// textStyle returns a plain-text style.
func textStyle(f font.Font, size vg.Length, c color.Color, xa text.XAlignment, ya text.YAlignment) text.Style {
	return text.Style{
		Color:   c,
		Font:    font.From(f, size),
		XAlign:  xa,
		YAlign:  ya,
		Handler: plot.DefaultTextHandler,
	}
}

// newPlot returns a gonum plot in the house style: Liberation Sans, thin
// grey axes, no title.
func newPlot() *plot.Plot {
	p := plot.New()
	p.BackgroundColor = nil
	for _, a := range []*plot.Axis{&p.X, &p.Y} {
		a.Label.TextStyle.Font = font.From(sans, sizeLabel)
		a.Label.TextStyle.Color = inkText
		a.Tick.Label.Font = font.From(sans, sizeTick)
		a.Tick.Label.Color = inkText
		a.LineStyle.Color = inkMuted
		a.LineStyle.Width = 0.6
		a.Tick.LineStyle.Color = inkMuted
		a.Tick.LineStyle.Width = 0.6
		a.Tick.Length = 4
		a.Label.Padding = 3
		a.Padding = 0
	}
	return p
}

// niceTicks places labelled ticks at a "nice" step (1, 2 or 5 × 10^k)
// chosen so that about N of them span the axis, with unlabelled minor ticks
// halfway between; labels use the minus sign (U+2212) for negatives.
type niceTicks struct{ N int }

// Ticks implements plot.Ticker.
func (t niceTicks) Ticks(min, max float64) []plot.Tick {
	if !(max > min) || math.IsInf(max-min, 0) {
		return nil
	}
	n := t.N
	if n < 2 {
		n = 5
	}
	step := niceStep((max - min) / float64(n))
	decimals := max0(-int(math.Floor(math.Log10(step))))
	var ts []plot.Tick
	first := math.Ceil(min/step*2) / 2
	// At most 2n+3 ticks: the step is at least (max-min)/n.
	for k := 0; k <= 4*n+4; k++ {
		v := (first + float64(k)/2) * step
		if v > max+step*1e-9 {
			break
		}
		if math.Abs(v) < step*1e-9 {
			v = 0
		}
		if major := math.Abs(v/step-math.Round(v/step)) < 1e-6; major {
			ts = append(ts, plot.Tick{Value: v, Label: minus(strconv.FormatFloat(v, 'f', decimals, 64))})
		} else {
			ts = append(ts, plot.Tick{Value: v})
		}
	}
	return ts
}

// niceStep returns the smallest of 1, 2, 5 × 10^k that is at least raw.
func niceStep(raw float64) float64 {
	p := math.Pow(10, math.Floor(math.Log10(raw)))
	for _, m := range []float64{1, 2, 5, 10} {
		if m*p >= raw*(1-1e-9) {
			return m * p
		}
	}
	return 10 * p
}

func max0(n int) int {
	if n < 0 {
		return 0
	}
	return n
}

// minus replaces a leading hyphen-minus by the minus sign.
func minus(s string) string {
	if strings.HasPrefix(s, "-") {
		return "−" + s[1:]
	}
	return s
}
