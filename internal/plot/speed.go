package plot

import (
	"fmt"
	"image/color"
	"math"
	"strings"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
)

// eventLine is the style of the vertical event markers.
var eventLine = draw.LineStyle{Color: inkEvent, Width: 0.8, Dashes: []vg.Length{3, 2}}

// labelHalo is the translucent white behind peak labels.
var labelHalo = color.NRGBA{R: 0xFF, G: 0xFF, B: 0xFF, A: 0xD9}

// speedHeadroom is the room above the fastest curve, as a fraction of its
// peak, for the peak value labels.
const speedHeadroom = 0.12

// drawSpeed draws the speed panel in c (event labels in a strip at its top)
// and, in foot, a note on the events outside the window.
func (v *view) drawSpeed(c, foot draw.Canvas) {
	p := newPlot()
	p.X.Label.Text = "time from impact (ms)"
	p.Y.Label.Text = speedAxisLabel(v.resp.GetSpeed())
	p.X.Tick.Marker = niceTicks{N: 8}
	p.Y.Tick.Marker = niceTicks{N: 6}

	grid := plotter.NewGrid()
	grid.Vertical = draw.LineStyle{Color: inkGrid, Width: 0.5}
	grid.Horizontal = draw.LineStyle{Color: inkGrid, Width: 0.5}
	p.Add(grid)

	var inView []mark
	for _, e := range v.events {
		if e.Ms >= v.fromMs && e.Ms <= v.toMs {
			inView = append(inView, e)
		}
	}
	p.Add(eventLines{marks: inView})

	for _, cv := range v.curves {
		xys := make(plotter.XYs, len(cv.Ms))
		for i := range cv.Ms {
			xys[i] = plotter.XY{X: cv.Ms[i], Y: cv.Speed[i]}
		}
		for _, ls := range styleOf(cv.Segment).lines() {
			// The series were checked finite in newView, so NewLine cannot fail.
			l, err := plotter.NewLine(xys)
			if err != nil {
				continue
			}
			l.LineStyle = ls
			p.Add(l)
		}
	}

	var pm peakMarks
	for _, cv := range v.curves {
		if sp, ok := v.peaks[cv.Segment]; ok {
			t := v.ms(sp.GetPeakTimeS())
			if t >= v.fromMs && t <= v.toMs {
				pm = append(pm, peakMark{Segment: cv.Segment, Ms: t, Speed: sp.GetPeakSpeedDegPerS()})
			}
		}
	}
	p.Add(pm)

	p.X.Min, p.X.Max = v.fromMs, v.toMs
	p.Y.Min = 0
	p.Y.Max = math.Max(v.maxSpeed*(1+speedHeadroom), 1)

	plotArea := draw.Crop(c, 0, 0, 0, -stripRow*stripRows-4)
	p.Draw(plotArea)

	// Event labels above the data area, in up to stripRows rows, each joined
	// to its line by a leader.
	data := p.DataCanvas(plotArea)
	xf, _ := p.Transforms(&data)
	sty := textStyle(sans, sizeNote, inkText, draw.XCenter, draw.YBottom)
	var rowEnd [stripRows]vg.Length
	for i := range rowEnd {
		rowEnd[i] = c.Min.X - 1e6
	}
	for _, e := range inView {
		x := xf(e.Ms)
		label := eventName(e.Kind)
		if e.Kind != kinchainv1.EventKind_EVENT_KIND_IMPACT {
			label += " " + signed(e.Ms, 0)
		}
		w := sty.Width(label)
		lx := min(max(x, c.Min.X+w/2), c.Max.X-w/2)
		row := 0
		for row < stripRows-1 && lx-w/2 < rowEnd[row]+6 {
			row++
		}
		rowEnd[row] = lx + w/2
		base := data.Max.Y + 4 + vg.Length(row)*stripRow
		c.StrokeLine2(eventLine, x, data.Max.Y, x, base-1)
		c.FillText(sty, vg.Point{X: lx, Y: base}, label)
	}

	var outside []string
	for _, e := range v.events {
		if e.Ms < v.fromMs || e.Ms > v.toMs {
			outside = append(outside, fmt.Sprintf("%s %s ms", eventName(e.Kind), signed(e.Ms, 0)))
		}
	}
	if len(outside) > 0 {
		note := textStyle(sans, sizeNote, inkMuted, draw.XLeft, draw.YTop)
		foot.FillText(note, vg.Point{X: data.Min.X, Y: foot.Max.Y - 2}, "Outside the window: "+strings.Join(outside, ", "))
	}
}

// eventLines is a plotter of vertical lines at event times.
type eventLines struct{ marks []mark }

// Plot implements plot.Plotter.
func (e eventLines) Plot(c draw.Canvas, p *plot.Plot) {
	xf, _ := p.Transforms(&c)
	for _, m := range e.marks {
		x := xf(m.Ms)
		c.StrokeLine2(eventLine, x, c.Min.Y, x, c.Max.Y)
	}
}

// peakMark is one segment's peak speed.
type peakMark struct {
	Segment kinchainv1.Segment
	Ms      float64 // relative to impact
	Speed   float64 // deg/s
}

// peakMarks is a plotter of peak dots with their values; labels that would
// overlap one another are moved up or aside.
type peakMarks []peakMark

// Plot implements plot.Plotter.
func (pm peakMarks) Plot(c draw.Canvas, p *plot.Plot) {
	xf, yf := p.Transforms(&c)
	sty := textStyle(sans, sizeNote, inkText, draw.XCenter, draw.YBottom)
	h := sty.Height("0")
	var placed []vg.Rectangle
	overlaps := func(r vg.Rectangle) bool {
		for _, q := range placed {
			if r.Min.X < q.Max.X && q.Min.X < r.Max.X && r.Min.Y < q.Max.Y && q.Min.Y < r.Max.Y {
				return true
			}
		}
		return false
	}
	for _, m := range pm {
		pt := vg.Point{X: xf(m.Ms), Y: yf(m.Speed)}
		st := styleOf(m.Segment)
		c.DrawGlyph(draw.GlyphStyle{Color: inkCasing, Radius: 3.6, Shape: draw.CircleGlyph{}}, pt)
		c.DrawGlyph(draw.GlyphStyle{Color: st.Color, Radius: 2.6, Shape: draw.CircleGlyph{}}, pt)

		label := fmt.Sprintf("%.0f", m.Speed)
		w := sty.Width(label)
		// Candidate label centres: above, above-left, above-right, then
		// higher, bounded.
		var at vg.Point
		found := false
		for lift := 0; lift < 6 && !found; lift++ {
			dy := 5 + vg.Length(lift)*h
			for _, dx := range []vg.Length{0, -w/2 - 4, w/2 + 4} {
				cand := vg.Point{X: pt.X + dx, Y: pt.Y + dy}
				r := vg.Rectangle{Min: vg.Point{X: cand.X - w/2 - 1, Y: cand.Y}, Max: vg.Point{X: cand.X + w/2 + 1, Y: cand.Y + h}}
				if !overlaps(r) {
					at, found = cand, true
					placed = append(placed, r)
					break
				}
			}
		}
		if !found {
			at = vg.Point{X: pt.X, Y: pt.Y + 5}
		}
		halo := vg.Rectangle{Min: vg.Point{X: at.X - w/2 - 1, Y: at.Y}, Max: vg.Point{X: at.X + w/2 + 1, Y: at.Y + h}}
		c.SetColor(labelHalo)
		c.Fill(halo.Path())
		c.FillText(sty, at, label)
	}
}
