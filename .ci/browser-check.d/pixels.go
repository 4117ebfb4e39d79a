// Command pixels checks a browser screenshot of a kinchain swing plot: that
// it is not blank and that each segment's colour is drawn inside the speed
// panel, where expected. It is the helper of .ci/browser-check and uses the
// standard library only:
//
//	go run .ci/browser-check.d/pixels.go -png shot.png -region 24,77,547,651 \
//	    -colors pelvis=#E69F00,thorax=#CC79A7,lead_upper_arm=#F0E442,club=#000000 \
//	    -higher club,lead_upper_arm,thorax,pelvis
//
// -region is the speed panel in screenshot pixels (x0,y0,x1,y1). -higher
// lists segments whose curves reach successively lower in the panel (their
// topmost pixel is lower on the screen): peak speeds grow from the pelvis to
// the club in a proximal-to-distal swing (common practice, no source), so
// the club's curve is the tallest.
package main

import (
	"errors"
	"flag"
	"fmt"
	"image/png"
	"os"
	"strconv"
	"strings"
)

func main() {
	if err := run(); err != nil {
		fmt.Fprintln(os.Stderr, "pixels:", err)
		os.Exit(1)
	}
}

type target struct {
	name    string
	r, g, b int
	count   int
	top     int // smallest y with the colour, -1 if none
}

func run() error {
	file := flag.String("png", "", "screenshot (PNG)")
	region := flag.String("region", "", "speed panel x0,y0,x1,y1 in pixels")
	colors := flag.String("colors", "", "name=#RRGGBB,... segment colours")
	higher := flag.String("higher", "", "names, tallest curve first")
	tol := flag.Int("tol", 20, "per-channel tolerance for a colour match")
	minPix := flag.Int("min", 150, "least pixels of each colour in the region")
	flag.Parse()

	f, err := os.Open(*file)
	if err != nil {
		return err
	}
	defer f.Close()
	img, err := png.Decode(f)
	if err != nil {
		return fmt.Errorf("%s: %v", *file, err)
	}
	b := img.Bounds()
	fmt.Printf("screenshot %dx%d\n", b.Dx(), b.Dy())

	// Not blank: a fair share of non-white pixels and many distinct colours.
	nonWhite, distinct := 0, map[uint32]bool{}
	for y := b.Min.Y; y < b.Max.Y; y++ {
		for x := b.Min.X; x < b.Max.X; x++ {
			r, g, bl, _ := img.At(x, y).RGBA()
			if r>>8 < 245 || g>>8 < 245 || bl>>8 < 245 {
				nonWhite++
			}
			if len(distinct) < 5000 {
				distinct[(r>>8)<<16|(g>>8)<<8|bl>>8] = true
			}
		}
	}
	share := float64(nonWhite) / float64(b.Dx()*b.Dy())
	fmt.Printf("non-white pixels %.1f %%, distinct colours %d\n", 100*share, len(distinct))
	if share < 0.02 || len(distinct) < 50 {
		return errors.New("the screenshot is blank or nearly so")
	}

	var rg [4]int
	parts := strings.Split(*region, ",")
	if len(parts) != 4 {
		return fmt.Errorf("-region %q: want x0,y0,x1,y1", *region)
	}
	for i, p := range parts {
		if rg[i], err = strconv.Atoi(strings.TrimSpace(p)); err != nil {
			return fmt.Errorf("-region %q: %v", *region, err)
		}
	}
	var targets []*target
	for _, kv := range strings.Split(*colors, ",") {
		name, hex, ok := strings.Cut(kv, "=")
		v, err := strconv.ParseUint(strings.TrimPrefix(hex, "#"), 16, 32)
		if !ok || err != nil || len(strings.TrimPrefix(hex, "#")) != 6 {
			return fmt.Errorf("-colors: %q is not name=#RRGGBB", kv)
		}
		targets = append(targets, &target{name: name, r: int(v >> 16), g: int(v >> 8 & 0xFF), b: int(v & 0xFF), top: -1})
	}
	if len(targets) == 0 {
		return errors.New("-colors: none given")
	}
	for y := rg[1]; y < rg[3] && y < b.Max.Y; y++ {
		for x := rg[0]; x < rg[2] && x < b.Max.X; x++ {
			r, g, bl, _ := img.At(x, y).RGBA()
			for _, t := range targets {
				if abs(int(r>>8)-t.r) <= *tol && abs(int(g>>8)-t.g) <= *tol && abs(int(bl>>8)-t.b) <= *tol {
					t.count++
					if t.top < 0 {
						t.top = y
					}
				}
			}
		}
	}
	var errs []error
	byName := map[string]*target{}
	for _, t := range targets {
		byName[t.name] = t
		fmt.Printf("%-16s #%02X%02X%02X  %6d pixels in the speed panel, topmost at y=%d\n", t.name, t.r, t.g, t.b, t.count, t.top)
		if t.count < *minPix {
			errs = append(errs, fmt.Errorf("%s: only %d pixels of its colour in the speed panel (want ≥ %d)", t.name, t.count, *minPix))
		}
	}
	if *higher != "" {
		names := strings.Split(*higher, ",")
		for i := 1; i < len(names); i++ {
			a, b := byName[names[i-1]], byName[names[i]]
			if a == nil || b == nil {
				return fmt.Errorf("-higher: %q or %q is not in -colors", names[i-1], names[i])
			}
			if !(a.top >= 0 && b.top >= 0 && a.top < b.top) {
				errs = append(errs, fmt.Errorf("%s's curve (top y=%d) does not reach above %s's (top y=%d)", a.name, a.top, b.name, b.top))
			}
		}
	}
	return errors.Join(errs...)
}

func abs(x int) int {
	if x < 0 {
		return -x
	}
	return x
}
