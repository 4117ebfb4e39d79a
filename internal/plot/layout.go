package plot

import (
	"fmt"
	"strings"
	"unicode"

	"gonum.org/v1/plot/text"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
)

// Page layout, pt (the page is pageWidth wide; see render.go).
const (
	margin       = vg.Length(18)  // page margin
	headerHeight = vg.Length(40)  // title and subtitle
	sideWidth    = vg.Length(158) // key column beside the speed panel
	gutter       = vg.Length(14)  // between panels side by side
	bottomHeight = vg.Length(206) // transition and posture panels
	footHeight   = vg.Length(24)  // note under the speed panel
	stripRow     = vg.Length(11)  // one row of event labels
	stripRows    = 3
	postureWidth = vg.Length(246)
)

// draw lays out the whole page on c.
func (v *view) draw(c draw.Canvas) {
	r := c.Rectangle
	left, right := r.Min.X+margin, r.Max.X-margin
	top, bottom := r.Max.Y-margin, r.Min.Y+margin

	v.drawHeader(c, left, right, top)

	rowTop := bottom + bottomHeight
	speed := sub(c, left, rowTop+footHeight+gutter, right-sideWidth-gutter, top-headerHeight)
	v.drawSpeed(speed, sub(c, left, rowTop+gutter, speed.Max.X, speed.Min.Y))
	v.drawKey(sub(c, right-sideWidth, speed.Min.Y, right, speed.Max.Y))

	v.drawTransitions(sub(c, left, bottom, right-postureWidth-gutter, rowTop))
	v.drawPosture(sub(c, right-postureWidth, bottom, right, rowTop))
}

// sub is the part of c inside the given rectangle.
func sub(c draw.Canvas, x0, y0, x1, y1 vg.Length) draw.Canvas {
	return draw.Canvas{Canvas: c.Canvas, Rectangle: vg.Rectangle{Min: vg.Point{X: x0, Y: y0}, Max: vg.Point{X: x1, Y: y1}}}
}

func (v *view) drawHeader(c draw.Canvas, left, right, top vg.Length) {
	title := fmt.Sprintf("Swing %d of %d", v.pos+1, len(v.resp.GetSwings()))
	if id := v.resp.GetCaptureId(); id != "" {
		title += " · " + id
	}
	sty := textStyle(sansBold, sizeTitle, inkText, draw.XLeft, draw.YTop)
	c.FillText(sty, vg.Point{X: left, Y: top}, fit(sty, title, right-left))

	var parts []string
	switch v.resp.GetHandedness() {
	case kinchainv1.Handedness_HANDEDNESS_LEFT:
		parts = append(parts, "left-handed")
	default:
		parts = append(parts, "right-handed")
	}
	parts = append(parts, speedName(v.resp.GetSpeed()))
	if hz := v.resp.GetSampleRateHz(); hz > 0 {
		parts = append(parts, fmt.Sprintf("%.0f Hz", hz))
	}
	parts = append(parts, fmt.Sprintf("impact at %.3f s", v.impactS))
	if n := len(v.resp.GetSwings()); n > 1 {
		parts = append(parts, fmt.Sprintf("swing %d of 0–%d", v.pos, n-1))
	}
	c.FillText(textStyle(sans, sizeNote+0.5, inkMuted, draw.XLeft, draw.YTop), vg.Point{X: left, Y: top - 19}, strings.Join(parts, "  ·  "))

	c.StrokeLine2(draw.LineStyle{Color: inkRule, Width: 0.6}, left, top-headerHeight+8, right, top-headerHeight+8)
}

// fit returns s without the characters that cannot appear in SVG text
// (controls), shortened with an ellipsis to at most width w in style sty.
func fit(sty text.Style, s string, w vg.Length) string {
	s = strings.Map(func(r rune) rune {
		if !unicode.IsPrint(r) {
			return -1
		}
		return r
	}, s)
	if sty.Width(s) <= w {
		return s
	}
	rs := []rune(s)
	for n := len(rs) - 1; n > 0; n-- {
		if t := string(rs[:n]) + "…"; sty.Width(t) <= w {
			return t
		}
	}
	return "…"
}

// speedName describes the speed definition in words.
func speedName(s kinchainv1.SpeedDefinition) string {
	switch s {
	case kinchainv1.SpeedDefinition_SPEED_DEFINITION_VERTICAL:
		return "speed = turn rate about the vertical"
	case kinchainv1.SpeedDefinition_SPEED_DEFINITION_LONG_AXIS:
		return "speed = turn rate about each segment's long axis"
	}
	return "speed = |ω|, the angular velocity's magnitude"
}

// speedAxisLabel is the speed panel's y-axis label, with its unit.
func speedAxisLabel(s kinchainv1.SpeedDefinition) string {
	switch s {
	case kinchainv1.SpeedDefinition_SPEED_DEFINITION_VERTICAL:
		return "turn rate about vertical (deg/s)"
	case kinchainv1.SpeedDefinition_SPEED_DEFINITION_LONG_AXIS:
		return "turn rate about long axis (deg/s)"
	}
	return "angular speed (deg/s)"
}

// signed formats a value with an explicit sign (minus sign U+2212) and the
// given number of decimals; zero has no sign.
func signed(x float64, decimals int) string {
	s := fmt.Sprintf("%+.*f", decimals, x)
	if strings.Trim(s[1:], "0.") == "" {
		return s[1:]
	}
	if s[0] == '-' {
		return "−" + s[1:]
	}
	return s
}

// wrap breaks s into lines no wider than w in style sty.
func wrap(sty text.Style, s string, w vg.Length) []string {
	var lines []string
	line := ""
	for _, word := range strings.Fields(s) {
		try := word
		if line != "" {
			try = line + " " + word
		}
		if line != "" && sty.Width(try) > w {
			lines = append(lines, line)
			line = word
			continue
		}
		line = try
	}
	if line != "" {
		lines = append(lines, line)
	}
	return lines
}

// drawKey draws the column beside the speed panel: the line key with peak
// values, the gains, the peak order and the tempo.
func (v *view) drawKey(c draw.Canvas) {
	x0, x1 := c.Min.X, c.Max.X
	y := c.Max.Y - 2
	head := textStyle(sansBold, sizeHeading, inkText, draw.XLeft, draw.YTop)
	body := textStyle(sans, sizeNote+0.5, inkText, draw.XLeft, draw.YTop)
	bodyRight := textStyle(sans, sizeNote+0.5, inkText, draw.XRight, draw.YTop)
	note := textStyle(sans, sizeNote, inkMuted, draw.XLeft, draw.YTop)

	c.FillText(head, vg.Point{X: x0, Y: y}, "Segments")
	// More than six segments: one line each, the peak speed at the right.
	compact := len(v.curves) > 6
	if compact {
		c.FillText(note, vg.Point{X: x0 + head.Width("Segments") + 5, Y: y - 0.5}, "peak deg/s")
	}
	y -= 15
	for _, cv := range v.curves {
		st := styleOf(cv.Segment)
		mid := y - 5
		for _, ls := range st.lines() {
			c.StrokeLine2(ls, x0, mid, x0+26, mid)
		}
		c.FillText(body, vg.Point{X: x0 + 32, Y: y}, segmentName(cv.Segment))
		p, ok := v.peaks[cv.Segment]
		if compact {
			if ok {
				c.FillText(bodyRight, vg.Point{X: x1, Y: y}, fmt.Sprintf("%.0f", p.GetPeakSpeedDegPerS()))
			}
			y -= 14
			continue
		}
		y -= 11
		if ok {
			c.FillText(note, vg.Point{X: x0 + 32, Y: y},
				fmt.Sprintf("peak %.0f deg/s at %s ms", p.GetPeakSpeedDegPerS(), signed(v.ms(p.GetPeakTimeS()), 0)))
		} else {
			c.FillText(note, vg.Point{X: x0 + 32, Y: y}, "not in the sequence")
		}
		y -= 15
	}

	if gains := v.sw.GetGains(); len(gains) > 0 {
		y -= 6
		c.FillText(head, vg.Point{X: x0, Y: y}, "Gains")
		c.FillText(note, vg.Point{X: x0 + head.Width("Gains") + 5, Y: y - 0.5}, "distal ÷ proximal peak")
		y -= 15
		for _, g := range gains {
			c.FillText(body, vg.Point{X: x0, Y: y}, segmentName(g.GetProximal())+" → "+segmentName(g.GetDistal()))
			c.FillText(bodyRight, vg.Point{X: x1, Y: y}, fmt.Sprintf("×%.2f", g.GetRatio()))
			y -= 13
		}
	}

	// The order of the segments drawn (the whole order is in the report).
	var names []string
	for _, s := range v.sw.GetPeakOrder() {
		for _, cv := range v.curves {
			if cv.Segment == s {
				names = append(names, segmentName(s))
				break
			}
		}
	}
	if len(names) > 0 {
		y -= 8
		c.FillText(head, vg.Point{X: x0, Y: y}, "Order of peaks")
		y -= 15
		for _, l := range wrap(body, strings.Join(names, " › "), x1-x0) {
			c.FillText(body, vg.Point{X: x0, Y: y}, l)
			y -= 12
		}
		verdict := "not proximal to distal"
		if v.sw.GetProximalToDistal() {
			verdict = "proximal to distal"
		}
		c.FillText(note, vg.Point{X: x0, Y: y}, verdict)
		y -= 13
	}

	if t := v.sw.GetTempo(); t != nil && t.GetDownswingS() > 0 {
		y -= 8
		c.FillText(head, vg.Point{X: x0, Y: y}, "Tempo")
		y -= 15
		c.FillText(body, vg.Point{X: x0, Y: y}, "backswing")
		c.FillText(bodyRight, vg.Point{X: x1, Y: y}, fmt.Sprintf("%.2f s", t.GetBackswingS()))
		y -= 12
		c.FillText(body, vg.Point{X: x0, Y: y}, "downswing")
		c.FillText(bodyRight, vg.Point{X: x1, Y: y}, fmt.Sprintf("%.2f s", t.GetDownswingS()))
		y -= 12
		c.FillText(body, vg.Point{X: x0, Y: y}, "ratio")
		c.FillText(bodyRight, vg.Point{X: x1, Y: y}, fmt.Sprintf("%.1f : 1", t.GetRatio()))
	}
}

// drawPosture draws the posture table: pelvis and thorax angles (deg) at
// address, top and impact, and the thorax's rotation relative to the pelvis.
func (v *view) drawPosture(c draw.Canvas) {
	x0, x1 := c.Min.X, c.Max.X
	y := c.Max.Y
	head := textStyle(sansBold, sizeHeading, inkText, draw.XLeft, draw.YTop)
	c.FillText(head, vg.Point{X: x0, Y: y}, "Posture (deg)")
	c.FillText(textStyle(sans, sizeNote, inkMuted, draw.XLeft, draw.YTop),
		vg.Point{X: x0 + head.Width("Posture (deg)") + 5, Y: y - 0.5}, "target-line frame")
	y -= 20

	kinds := []kinchainv1.EventKind{
		kinchainv1.EventKind_EVENT_KIND_ADDRESS,
		kinchainv1.EventKind_EVENT_KIND_TOP,
		kinchainv1.EventKind_EVENT_KIND_IMPACT,
	}
	postures := make([]*kinchainv1.Posture, len(kinds))
	for _, p := range v.sw.GetPostures() {
		for i, k := range kinds {
			if p.GetEvent() == k && postures[i] == nil {
				postures[i] = p
			}
		}
	}
	const colW = vg.Length(44)
	colX := func(i int) vg.Length { return x1 - vg.Length(len(kinds)-1-i)*colW - 4 }
	colHead := textStyle(sansBold, sizeNote, inkText, draw.XRight, draw.YTop)
	for i, k := range kinds {
		c.FillText(colHead, vg.Point{X: colX(i), Y: y}, eventName(k))
	}
	y -= 12
	c.StrokeLine2(draw.LineStyle{Color: inkRule, Width: 0.6}, x0, y, x1, y)
	y -= 3

	type row struct {
		label string
		get   func(*kinchainv1.Posture) (float64, bool)
	}
	body := func(get func(*kinchainv1.Posture) *kinchainv1.BodyAngles) []row {
		return []row{
			{"axial rotation", func(p *kinchainv1.Posture) (float64, bool) {
				a := get(p)
				return a.GetAxialRotationDeg(), a != nil
			}},
			{"flexion", func(p *kinchainv1.Posture) (float64, bool) {
				a := get(p)
				return a.GetFlexionDeg(), a != nil
			}},
			{"lateral bend", func(p *kinchainv1.Posture) (float64, bool) {
				a := get(p)
				return a.GetLateralBendDeg(), a != nil
			}},
		}
	}
	groups := []struct {
		name string
		seg  kinchainv1.Segment
		rows []row
	}{
		{"pelvis", kinchainv1.Segment_SEGMENT_PELVIS, body((*kinchainv1.Posture).GetPelvis)},
		{"thorax", kinchainv1.Segment_SEGMENT_THORAX, body((*kinchainv1.Posture).GetThorax)},
		{"thorax rel. pelvis", kinchainv1.Segment_SEGMENT_UNSPECIFIED, body((*kinchainv1.Posture).GetSeparation)[:1]},
	}
	const rowH = vg.Length(12)
	label := textStyle(sans, sizeNote+0.5, inkText, draw.XLeft, draw.YTop)
	group := textStyle(sansBold, sizeNote+0.5, inkText, draw.XLeft, draw.YTop)
	num := textStyle(sans, sizeNote+0.5, inkText, draw.XRight, draw.YTop)
	band := false
	for _, g := range groups {
		gx := x0
		if g.seg != kinchainv1.Segment_SEGMENT_UNSPECIFIED {
			for _, ls := range styleOf(g.seg).lines() {
				c.StrokeLine2(ls, x0, y-4.5, x0+12, y-4.5)
			}
			gx += 16
		}
		c.FillText(group, vg.Point{X: gx, Y: y - 1}, g.name)
		y -= rowH + 1
		for _, r := range g.rows {
			if band {
				c.SetColor(inkBand)
				c.Fill(vg.Rectangle{Min: vg.Point{X: x0, Y: y - rowH + 1.5}, Max: vg.Point{X: x1, Y: y + 1.5}}.Path())
			}
			band = !band
			c.FillText(label, vg.Point{X: x0 + 10, Y: y - 1}, r.label)
			for i, p := range postures {
				s := "–"
				if p != nil {
					if val, ok := r.get(p); ok && finite(val) {
						s = signed(val, 1)
					}
				}
				c.FillText(num, vg.Point{X: colX(i), Y: y - 1}, s)
			}
			y -= rowH
		}
		y -= 3
	}
	c.StrokeLine2(draw.LineStyle{Color: inkRule, Width: 0.6}, x0, y+1, x1, y+1)
	note := textStyle(sans, sizeNote-0.5, inkMuted, draw.XLeft, draw.YTop)
	for _, l := range wrap(note, "+ rotation toward the target, + flexion forward, + lateral bend toward the trail side", x1-x0) {
		y -= 3
		c.FillText(note, vg.Point{X: x0, Y: y}, l)
		y -= 9
	}
}
