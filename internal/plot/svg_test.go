package plot

import (
	"bytes"
	"encoding/xml"
	"fmt"
	"io"
	"math"
	"regexp"
	"sort"
	"strconv"
	"strings"
	"testing"
)

// svgDoc is the parsed SVG: every path and text element in page
// coordinates (pt, y up, as gonum/plot draws them).
type svgDoc struct {
	Width, Height string // the root's attributes
	ViewBox       string
	Paths         []svgPath
	Texts         []svgText
}

type svgPath struct {
	Points []point // every coordinate pair of d, in order
	Arc    bool    // d has arc commands (a glyph)
	Stroke string  // "#RRGGBB" or ""
	Fill   string
	Width  float64 // stroke-width
	Dashed bool
}

type svgText struct {
	X, Y    float64 // anchor in page coordinates (y up)
	Content string
	Size    float64 // font-size, pt
	Rotated bool    // inside a rotating group: X and Y are not page coordinates
}

type point struct{ X, Y float64 }

var numRE = regexp.MustCompile(`-?[0-9]*\.?[0-9]+(?:e-?[0-9]+)?`)

// parseSVG checks that b is well-formed XML (encoding/xml) and collects its
// paths and texts. gonum's SVG flips y with one root group
// "scale(1, -1) translate(0, -H)"; path data is therefore already in page
// coordinates (y up) and a text's y attribute is the negated page y.
func parseSVG(t *testing.T, b []byte) svgDoc {
	t.Helper()
	var doc svgDoc
	dec := xml.NewDecoder(bytes.NewReader(b))
	depth := 0
	var cur *svgText
	var nested []bool // per open element: inside a nested transform group
	for {
		tok, err := dec.Token()
		if err == io.EOF {
			break
		}
		if err != nil {
			t.Fatalf("SVG is not well-formed XML: %v", err)
		}
		switch el := tok.(type) {
		case xml.StartElement:
			depth++
			attr := map[string]string{}
			for _, a := range el.Attr {
				attr[a.Name.Local] = a.Value
			}
			in := len(nested) > 0 && nested[len(nested)-1]
			if tr := attr["transform"]; el.Name.Local == "g" && depth > 2 && tr != "" {
				if strings.Contains(tr, "scale") {
					t.Fatalf("unexpected scaling group %q (the tests assume the default width)", tr)
				}
				in = true // rotated text (the y-axis labels)
			}
			nested = append(nested, in)
			switch el.Name.Local {
			case "svg":
				doc.Width, doc.Height, doc.ViewBox = attr["width"], attr["height"], attr["viewBox"]
			case "path":
				if in {
					t.Fatal("path inside a nested transform: page coordinates unknown")
				}
				doc.Paths = append(doc.Paths, parsePath(attr["d"], attr["style"]))
			case "text":
				x, _ := strconv.ParseFloat(attr["x"], 64)
				y, _ := strconv.ParseFloat(attr["y"], 64)
				st := styleMap(attr["style"])
				size, _ := strconv.ParseFloat(strings.TrimSuffix(st["font-size"], "px"), 64)
				doc.Texts = append(doc.Texts, svgText{X: x, Y: -y, Size: size, Rotated: in})
				cur = &doc.Texts[len(doc.Texts)-1]
			}
		case xml.CharData:
			if cur != nil {
				cur.Content += string(el)
			}
		case xml.EndElement:
			depth--
			nested = nested[:len(nested)-1]
			if el.Name.Local == "text" {
				cur = nil
			}
		}
	}
	if doc.Width == "" {
		t.Fatal("no <svg> root element")
	}
	return doc
}

func styleMap(s string) map[string]string {
	m := map[string]string{}
	for _, kv := range strings.Split(s, ";") {
		k, v, ok := strings.Cut(kv, ":")
		if ok {
			m[strings.TrimSpace(k)] = strings.TrimSpace(v)
		}
	}
	return m
}

func parsePath(d, style string) svgPath {
	st := styleMap(style)
	p := svgPath{Stroke: st["stroke"], Fill: st["fill"], Arc: strings.Contains(d, "A")}
	if p.Stroke == "none" {
		p.Stroke = ""
	}
	switch p.Fill {
	case "none":
		p.Fill = ""
	case "":
		p.Fill = "#000000" // SVG's default fill, which vgsvg leaves out
	}
	p.Width, _ = strconv.ParseFloat(st["stroke-width"], 64)
	p.Dashed = st["stroke-dasharray"] != "" && st["stroke-dasharray"] != "none"
	// Commands: M/L x,y pairs; A rx,ry rot large sweep x,y.
	for _, cmd := range regexp.MustCompile(`[MLA][^MLAZ]*`).FindAllString(d, -1) {
		nums := numRE.FindAllString(cmd[1:], -1)
		if cmd[0] == 'A' && len(nums) == 7 {
			nums = nums[5:]
		}
		for i := 0; i+1 < len(nums); i += 2 {
			x, _ := strconv.ParseFloat(nums[i], 64)
			y, _ := strconv.ParseFloat(nums[i+1], 64)
			p.Points = append(p.Points, point{x, y})
		}
	}
	return p
}

// hex is a colour as the SVG writes it.
func hex(c interface{ RGBA() (r, g, b, a uint32) }) string {
	r, g, b, _ := c.RGBA()
	return fmt.Sprintf("#%02X%02X%02X", r>>8, g>>8, b>>8)
}

// vertical reports whether the path is one vertical segment, and its x.
func (p svgPath) vertical() (float64, bool) {
	if p.Arc || len(p.Points) != 2 || math.Abs(p.Points[0].X-p.Points[1].X) > 1e-6 {
		return 0, false
	}
	return p.Points[0].X, true
}

func (p svgPath) yRange() (float64, float64) {
	lo, hi := math.Inf(1), math.Inf(-1)
	for _, q := range p.Points {
		lo, hi = math.Min(lo, q.Y), math.Max(hi, q.Y)
	}
	return lo, hi
}

// centre is the centre of a glyph path (the middle of its bounding box).
func (p svgPath) centre() point {
	x0, x1 := math.Inf(1), math.Inf(-1)
	y0, y1 := math.Inf(1), math.Inf(-1)
	for _, q := range p.Points {
		x0, x1 = math.Min(x0, q.X), math.Max(x1, q.X)
		y0, y1 = math.Min(y0, q.Y), math.Max(y1, q.Y)
	}
	return point{(x0 + x1) / 2, (y0 + y1) / 2}
}

// text returns the first text element with exactly this content.
func (d svgDoc) text(s string) (svgText, bool) {
	for _, t := range d.Texts {
		if t.Content == s {
			return t, true
		}
	}
	return svgText{}, false
}

// parseTick parses a tick label, accepting the minus sign.
func parseTick(s string) (float64, bool) {
	v, err := strconv.ParseFloat(strings.Replace(s, "−", "-", 1), 64)
	return v, err == nil
}

// linear is x = A + B·value.
type linear struct{ A, B float64 }

func (l linear) at(v float64) float64 { return l.A + l.B*v }

// axisMap recovers a panel's data-to-page mapping of its x axis from what
// the picture shows, not from the code that drew it: the numeric tick labels
// in the row just above the axis label, paired in order with the vertical
// grid lines of the panel (drawn at the labelled ticks), fitted by least
// squares. It fails the test when the labels and grid lines do not pair up
// or do not lie on one line.
func axisMap(t *testing.T, d svgDoc, axisLabel string) (linear, [2]float64) {
	t.Helper()
	lab, ok := d.text(axisLabel)
	if !ok {
		t.Fatalf("no axis label %q", axisLabel)
	}
	// Tick labels: numeric texts in the nearest row above the axis label.
	rows := map[float64][]svgText{}
	for _, tx := range d.Texts {
		if _, ok := parseTick(tx.Content); ok && !tx.Rotated && tx.Y > lab.Y && tx.Y < lab.Y+20 {
			rows[math.Round(tx.Y*100)/100] = append(rows[math.Round(tx.Y*100)/100], tx)
		}
	}
	best := math.Inf(1)
	for y := range rows {
		if len(rows[y]) >= 2 && y < best {
			best = y
		}
	}
	ticks := rows[best]
	if len(ticks) < 2 {
		t.Fatalf("%q: fewer than 2 tick labels found", axisLabel)
	}
	sort.Slice(ticks, func(i, j int) bool { return ticks[i].X < ticks[j].X })
	// Grid lines: vertical grid-coloured paths starting just above the tick
	// labels (the data area's bottom edge), restricted to the panel's span.
	var xs []float64
	var yspan [2]float64
	for _, p := range d.Paths {
		x, ok := p.vertical()
		if !ok || p.Stroke != hex(inkGrid) {
			continue
		}
		lo, hi := p.yRange()
		if lo < best || lo > best+20 || x < ticks[0].X-30 || x > ticks[len(ticks)-1].X+40 {
			continue
		}
		xs = append(xs, x)
		yspan = [2]float64{lo, hi}
	}
	sort.Float64s(xs)
	if len(xs) != len(ticks) {
		t.Fatalf("%q: %d tick labels but %d grid lines", axisLabel, len(ticks), len(xs))
	}
	var sv, sx, svv, svx float64
	n := float64(len(xs))
	vals := make([]float64, len(ticks))
	for i, tk := range ticks {
		v, _ := parseTick(tk.Content)
		vals[i] = v
		sv += v
		sx += xs[i]
		svv += v * v
		svx += v * xs[i]
	}
	b := (n*svx - sv*sx) / (n*svv - sv*sv)
	l := linear{A: (sx - b*sv) / n, B: b}
	for i := range xs {
		if r := math.Abs(l.at(vals[i]) - xs[i]); r > 0.01 {
			t.Fatalf("%q: tick %q at x=%.3f is %.3f pt off the fitted axis", axisLabel, ticks[i].Content, xs[i], r)
		}
	}
	return l, yspan
}
