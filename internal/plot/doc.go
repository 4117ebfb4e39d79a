// Package plot draws one swing of an analysis as a picture, SVG or PNG, with
// gonum/plot (vg/vgsvg and vg/vgimg).
//
// The picture has four parts, composed on one canvas:
//
//   - a header: the swing and capture, handedness, speed definition, rate;
//   - the speed panel: each segment's angular speed (deg/s) against time
//     relative to impact (ms), the swing events as labelled vertical lines,
//     each segment's peak marked with its value, and beside it a column with
//     the line key, the peak speeds and times, the gains between adjacent
//     links (distal peak / proximal peak), the peak order and the tempo;
//   - the transition panel: each segment's own backswing-to-downswing
//     reversal as a horizontal timeline relative to the top (ms);
//   - the posture panel: a small table of pelvis and thorax axial rotation,
//     flexion and lateral bend (deg) at address, top and impact, and the
//     thorax's axial rotation relative to the pelvis.
//
// # Colours
//
// Segment colours come from the Okabe–Ito palette (Okabe & Ito 2008, "Color
// Universal Design"), whose eight colours stay distinguishable for readers
// with the common colour-vision deficiencies. The rule for kinchain plots is
// that pelvis, thorax, the arms and the club are never red, green, blue or
// brown, so those segments, and the hands with them, use only the four
// palette colours that cannot be read as one of those: orange, reddish
// purple (a pink mauve), yellow and black. Okabe–Ito's vermillion (a red),
// bluish green (a green), blue and sky blue (both blues) are not used for
// them; only the head, outside the rule, is bluish green. Yellow is too
// light to read as a bare line on white, so yellow lines are drawn cased in
// a dark outline. Every segment also has its own dash pattern or casing, so
// the picture reads in greyscale too; the five links of the chain drawn by
// default all differ in pattern:
//
//	pelvis           orange          #E69F00  solid
//	thorax           reddish purple  #CC79A7  dashed
//	lead upper arm   yellow          #F0E442  solid, cased in #333333
//	lead hand        orange          #E69F00  dash-dot-dot
//	club             black           #000000  dash-dot
//	lead forearm     reddish purple  #CC79A7  dotted
//	trail upper arm  orange          #E69F00  long dash
//	trail forearm    black           #000000  dotted
//	trail hand       yellow          #F0E442  dotted, cased in #333333
//	head             bluish green    #009E73  dotted
//
// Event lines are mid grey and dashed; text is near black.
//
// # Sizes
//
// The picture is 4:5 (width:height); Options.WidthPx defaults to 800 px
// (1000 px high), which is the size every element is laid out for, and may
// be 400 to 2400 px. SVG output is 0.75 pt per px (so a browser shows it
// WidthPx wide) and is scaled as a whole; PNG output is rendered at the
// resolution that makes it exactly WidthPx wide, so text stays sharp.
//
// The SVG names its font ("Liberation Sans") without embedding it unless
// Options.EmbedFonts is set; Liberation Sans has the metrics of Arial and
// Helvetica, so a viewer without it still lays the text out nearly the same.
package plot
