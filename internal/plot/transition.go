package plot

import (
	"math"
	"slices"
	"strconv"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
)

// transitionRow is one segment's reversal on the transition panel.
type transitionRow struct {
	Segment kinchainv1.Segment
	Ms      float64 // relative to top
}

// transitionRows returns the transitions of the segments the speed panel
// draws, in its order.
func (v *view) transitionRows() []transitionRow {
	var rows []transitionRow
	seen := map[kinchainv1.Segment]bool{}
	add := func(t *kinchainv1.Transition) {
		if t == nil || seen[t.GetSegment()] || !finite(t.GetTimeFromTopMs()) {
			return
		}
		seen[t.GetSegment()] = true
		rows = append(rows, transitionRow{Segment: t.GetSegment(), Ms: t.GetTimeFromTopMs()})
	}
	for _, cv := range v.curves {
		for _, t := range v.sw.GetTransitions() {
			if t.GetSegment() == cv.Segment {
				add(t)
			}
		}
	}
	return rows
}

// drawTransitions draws the transition panel: each segment's own reversal
// from backswing to downswing as a stem from the top (0 ms) to its time.
func (v *view) drawTransitions(c draw.Canvas) {
	head := textStyle(sansBold, sizeHeading, inkText, draw.XLeft, draw.YTop)
	c.FillText(head, vg.Point{X: c.Min.X, Y: c.Max.Y}, "Transition order")
	c.FillText(textStyle(sans, sizeNote, inkMuted, draw.XLeft, draw.YTop),
		vg.Point{X: c.Min.X + head.Width("Transition order") + 5, Y: c.Max.Y - 0.5},
		"each segment's backswing-to-downswing reversal")
	area := draw.Crop(c, 0, 0, 0, -32)

	rows := v.transitionRows()
	if len(rows) == 0 {
		c.FillText(textStyle(sans, sizeNote+0.5, inkMuted, draw.XLeft, draw.YTop),
			vg.Point{X: area.Min.X, Y: area.Max.Y - 4}, "No transitions were reported for this swing.")
		return
	}

	p := newPlot()
	p.X.Label.Text = "time from top (ms)"
	p.X.Tick.Marker = niceTicks{N: 8}
	names := make([]string, len(rows))
	for i, r := range rows {
		names[len(rows)-1-i] = segmentName(r.Segment)
	}
	p.NominalY(names...)
	p.Y.Tick.Label.Font.Size = sizeNote + 0.5

	grid := plotter.NewGrid()
	grid.Vertical = draw.LineStyle{Color: inkGrid, Width: 0.5}
	grid.Horizontal.Color = nil
	p.Add(grid)
	p.Add(stems(rows))

	// The x range holds the stems and, beyond their ends, their labels:
	// a label of width w takes the fraction w/plotWidth of the range R, so
	// R = span + (wl + wr)/plotWidth·R on the sides that have labels.
	lo, hi := 0.0, 0.0
	var wl, wr vg.Length
	label := textStyle(sans, sizeNote, inkText, draw.XLeft, draw.YCenter)
	for i, r := range rows {
		lo, hi = math.Min(lo, r.Ms), math.Max(hi, r.Ms)
		w := label.Width(transitionLabel(r.Ms, i+1)) + 12
		if r.Ms < 0 {
			wl = max(wl, w)
		} else {
			wr = max(wr, w)
		}
	}
	var yw vg.Length
	for _, n := range names {
		yw = max(yw, p.Y.Tick.Label.Width(n))
	}
	plotW := float64(area.Max.X-area.Min.X-yw) - 12
	frac := math.Min(float64(wl+wr)/plotW, 0.8)
	span := math.Max(hi-lo, 20)
	rng := span / (1 - frac)
	p.X.Min = lo - rng*float64(wl)/plotW - 2
	p.X.Max = hi + rng*float64(wr)/plotW + 2
	if hi-lo < 20 { // center a tiny spread
		p.X.Min -= (20 - (hi - lo)) / 2
		p.X.Max += (20 - (hi - lo)) / 2
	}
	p.Y.Min, p.Y.Max = -0.6, float64(len(rows))-0.4
	p.Draw(area)
}

// stems is a plotter of the transition rows: a zero line marking the top,
// then per row a stem from 0 to the transition time, a dot and the value.
type stems []transitionRow

// Plot implements plot.Plotter.
func (s stems) Plot(c draw.Canvas, p *plot.Plot) {
	xf, yf := p.Transforms(&c)
	x0 := xf(0)
	c.StrokeLine2(eventLine, x0, c.Min.Y, x0, c.Max.Y)
	c.FillText(textStyle(sans, sizeNote, inkMuted, draw.XCenter, draw.YBottom), vg.Point{X: x0, Y: c.Max.Y + 2}, "top")

	order := make([]int, len(s))
	for i := range order {
		order[i] = i
	}
	// Rank by time so the label can say which reversed first.
	slices.SortStableFunc(order, func(a, b int) int { return cmpFloat(s[a].Ms, s[b].Ms) })
	rank := make([]int, len(s))
	for r, i := range order {
		rank[i] = r + 1
	}

	right := textStyle(sans, sizeNote, inkText, draw.XLeft, draw.YCenter)
	left := textStyle(sans, sizeNote, inkText, draw.XRight, draw.YCenter)
	for i, r := range s {
		y := yf(float64(len(s) - 1 - i))
		x := xf(r.Ms)
		st := styleOf(r.Segment)
		for _, ls := range st.lines() {
			ls.Dashes = nil
			c.StrokeLine2(ls, x0, y, x, y)
		}
		c.DrawGlyph(draw.GlyphStyle{Color: inkCasing, Radius: 3.8, Shape: draw.CircleGlyph{}}, vg.Point{X: x, Y: y})
		c.DrawGlyph(draw.GlyphStyle{Color: st.Color, Radius: 2.8, Shape: draw.CircleGlyph{}}, vg.Point{X: x, Y: y})
		label := transitionLabel(r.Ms, rank[i])
		if r.Ms >= 0 {
			c.FillText(right, vg.Point{X: x + 7, Y: y}, label)
		} else {
			c.FillText(left, vg.Point{X: x - 7, Y: y}, label)
		}
	}
}

// transitionLabel is the label of a transition: its time and rank.
func transitionLabel(ms float64, rank int) string {
	return signed(ms, 0) + " ms  (" + ordinal(rank) + ")"
}

// ordinal returns "1st", "2nd", "3rd", "4th", ...
func ordinal(n int) string {
	suffix := "th"
	switch {
	case n%100 >= 11 && n%100 <= 13:
	case n%10 == 1:
		suffix = "st"
	case n%10 == 2:
		suffix = "nd"
	case n%10 == 3:
		suffix = "rd"
	}
	return strconv.Itoa(n) + suffix
}
