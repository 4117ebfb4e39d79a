package plot

import (
	"fmt"
	"image/color"
	"math"
	"testing"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
)

// okabeIto is the palette of Okabe & Ito (2008), "Color Universal Design"
// (from memory; the same hex values are in the colour-blind palettes of
// many plotting libraries).
var okabeIto = map[string]string{
	"#000000": "black", "#E69F00": "orange", "#56B4E9": "sky blue", "#009E73": "bluish green",
	"#F0E442": "yellow", "#0072B2": "blue", "#D55E00": "vermillion", "#CC79A7": "reddish purple",
}

// hueName classifies a colour as red, green, blue, brown or "" (anything
// else) by its HSV hue, saturation and value. The boundaries are ordinary
// colour naming (common practice, no source): red 340°–30° (with vermillion),
// brown a dark orange (10°–50° with value below 0.65), green 75°–165°, blue 190°–255°;
// colours with saturation under 0.25 are greys.
func hueName(c color.RGBA) string {
	r, g, b := float64(c.R)/255, float64(c.G)/255, float64(c.B)/255
	mx, mn := math.Max(r, math.Max(g, b)), math.Min(r, math.Min(g, b))
	v := mx
	if mx == 0 || (mx-mn)/mx < 0.25 || v < 0.15 {
		return ""
	}
	var h float64
	switch mx {
	case r:
		h = math.Mod((g-b)/(mx-mn), 6) * 60
	case g:
		h = ((b-r)/(mx-mn) + 2) * 60
	default:
		h = ((r-g)/(mx-mn) + 4) * 60
	}
	if h < 0 {
		h += 360
	}
	switch {
	case h >= 10 && h < 50 && v < 0.65:
		return "brown"
	case h >= 340 || h < 30:
		return "red"
	case h >= 75 && h < 165:
		return "green"
	case h >= 190 && h < 255:
		return "blue"
	}
	return ""
}

func TestHueName(t *testing.T) {
	// The classifier itself, on colours whose names are not in doubt.
	cases := map[color.RGBA]string{
		rgb(0xFF, 0, 0): "red", rgb(0, 0x80, 0): "green", rgb(0, 0, 0xFF): "blue",
		rgb(0x8B, 0x45, 0x13):  "brown", // "saddle brown" of CSS Color Module Level 4
		rgb(0xA5, 0x2A, 0x2A):  "red",   // CSS "brown" is in fact a dark red
		rgb(0xFF, 0xA5, 0x00):  "",      // CSS "orange"
		rgb(0x80, 0x80, 0x80):  "",      // grey
		rgb(0x56, 0xB4, 0xE9):  "blue",  // Okabe–Ito sky blue
		rgb(0x00, 0x72, 0xB2):  "blue",  // Okabe–Ito blue
		okabeBluishGreen:       "green",
		okabeVermillionForTest: "red",
	}
	for c, want := range cases {
		if got := hueName(c); got != want {
			t.Errorf("hueName(%s) = %q, want %q", hex(c), got, want)
		}
	}
}

// okabeVermillionForTest is Okabe–Ito's vermillion, which the package does
// not use.
var okabeVermillionForTest = rgb(0xD5, 0x5E, 0x00)

// TestPalette checks the product rule (pelvis, thorax, arms and club never
// red, green, blue or brown), that every colour is from Okabe–Ito, and that
// segments stay apart in greyscale (different dash pattern or casing).
func TestPalette(t *testing.T) {
	ruled := []kinchainv1.Segment{
		kinchainv1.Segment_SEGMENT_PELVIS, kinchainv1.Segment_SEGMENT_THORAX,
		kinchainv1.Segment_SEGMENT_LEAD_UPPER_ARM, kinchainv1.Segment_SEGMENT_LEAD_FOREARM,
		kinchainv1.Segment_SEGMENT_TRAIL_UPPER_ARM, kinchainv1.Segment_SEGMENT_TRAIL_FOREARM,
		kinchainv1.Segment_SEGMENT_CLUB,
		// The hands are held to the rule too.
		kinchainv1.Segment_SEGMENT_LEAD_HAND, kinchainv1.Segment_SEGMENT_TRAIL_HAND,
	}
	for _, s := range ruled {
		if n := hueName(styleOf(s).Color); n != "" {
			t.Errorf("%s is drawn %s (%s)", segmentName(s), n, hex(styleOf(s).Color))
		}
	}
	seen := map[string]kinchainv1.Segment{}
	for v := range kinchainv1.Segment_name {
		s := kinchainv1.Segment(v)
		if s == kinchainv1.Segment_SEGMENT_UNSPECIFIED {
			continue
		}
		st, ok := segmentStyles[s]
		if !ok {
			t.Errorf("%s has no style", segmentName(s))
			continue
		}
		if _, ok := okabeIto[hex(st.Color)]; !ok {
			t.Errorf("%s: %s is not an Okabe–Ito colour", segmentName(s), hex(st.Color))
		}
		key := fmt.Sprint(hex(st.Color), st.Dashes, st.Cased)
		if o, dup := seen[key]; dup {
			t.Errorf("%s and %s are drawn alike", segmentName(s), segmentName(o))
		}
		seen[key] = s
		// A line too light to see on white must be cased; contrast ratio
		// per WCAG 2.1 (W3C), relative luminance of sRGB.
		if contrast(st.Color, color.RGBA{0xFF, 0xFF, 0xFF, 0xFF}) < 1.5 && !st.Cased {
			t.Errorf("%s: %s on white has contrast %.2f:1 and is not cased", segmentName(s), hex(st.Color), contrast(st.Color, color.RGBA{0xFF, 0xFF, 0xFF, 0xFF}))
		}
	}
	// Greyscale: the chain's links differ in pattern, not only colour.
	patterns := map[string]kinchainv1.Segment{}
	for _, s := range chain {
		k := fmt.Sprint(styleOf(s).Dashes, styleOf(s).Cased)
		if o, dup := patterns[k]; dup {
			t.Errorf("%s and %s have the same line pattern", segmentName(s), segmentName(o))
		}
		patterns[k] = s
	}
	if c := contrast(inkCasing, color.RGBA{0xFF, 0xFF, 0xFF, 0xFF}); c < 3 {
		t.Errorf("casing contrast %.2f:1, want at least 3:1 (WCAG 2.1 non-text contrast)", c)
	}
}

// contrast is the WCAG 2.1 contrast ratio (L1 + 0.05) / (L2 + 0.05).
func contrast(a, b color.RGBA) float64 {
	la, lb := luminance(a), luminance(b)
	if la < lb {
		la, lb = lb, la
	}
	return (la + 0.05) / (lb + 0.05)
}

// luminance is the WCAG 2.1 relative luminance of an sRGB colour.
func luminance(c color.RGBA) float64 {
	lin := func(v uint8) float64 {
		x := float64(v) / 255
		if x <= 0.04045 {
			return x / 12.92
		}
		return math.Pow((x+0.055)/1.055, 2.4)
	}
	return 0.2126*lin(c.R) + 0.7152*lin(c.G) + 0.0722*lin(c.B)
}

func TestContrastReference(t *testing.T) {
	// Black on white is 21:1 by the WCAG 2.1 definition.
	if c := contrast(rgb(0, 0, 0), rgb(0xFF, 0xFF, 0xFF)); math.Abs(c-21) > 1e-9 {
		t.Errorf("contrast(black, white) = %v, want 21", c)
	}
}

func TestNiceTicks(t *testing.T) {
	// 1-2-5 steps (common practice, no source).
	for raw, want := range map[float64]float64{0.13: 0.2, 1: 1, 3: 5, 7: 10, 174.5: 200, 220: 500, 0.05: 0.05} {
		if got := niceStep(raw); math.Abs(got-want) > 1e-12*want {
			t.Errorf("niceStep(%v) = %v, want %v", raw, got, want)
		}
	}
	ts := niceTicks{N: 8}.Ticks(-1134, 262)
	var labels []string
	for _, tk := range ts {
		if tk.Label != "" {
			labels = append(labels, tk.Label)
		}
	}
	if got := fmt.Sprint(labels); got != "[−1000 −800 −600 −400 −200 0 200]" {
		t.Errorf("labels = %s", got)
	}
	for i, tk := range ts {
		if i > 0 && math.Abs(tk.Value-ts[i-1].Value-100) > 1e-9 {
			t.Errorf("tick %v follows %v: want minor ticks halfway between the 200 ms steps", tk.Value, ts[i-1].Value)
		}
		if major := math.Mod(tk.Value, 200) == 0; major != (tk.Label != "") {
			t.Errorf("tick %v labelled %q", tk.Value, tk.Label)
		}
	}
	if ts := (niceTicks{N: 5}).Ticks(0, 0.5); ts[1].Value != 0.05 || ts[2].Label != "0.1" {
		t.Errorf("fractional ticks: %+v", ts[:3])
	}
	if ts := (niceTicks{}).Ticks(1, 1); ts != nil {
		t.Errorf("empty range: %v", ts)
	}
}

func TestSigned(t *testing.T) {
	for x, want := range map[float64]string{-12.4: "−12", 3.6: "+4", 0: "0", -0.2: "0", 0.4: "0"} {
		if got := signed(x, 0); got != want {
			t.Errorf("signed(%v, 0) = %q, want %q", x, got, want)
		}
	}
	if got := signed(-93.84, 1); got != "−93.8" {
		t.Errorf("signed(-93.84, 1) = %q", got)
	}
	for n, want := range map[int]string{1: "1st", 2: "2nd", 3: "3rd", 4: "4th", 11: "11th", 12: "12th", 21: "21st"} {
		if got := ordinal(n); got != want {
			t.Errorf("ordinal(%d) = %q, want %q", n, got, want)
		}
	}
}
