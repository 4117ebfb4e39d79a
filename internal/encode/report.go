package encode

import (
	"fmt"
	"io"
	"math"
	"strings"
	"text/tabwriter"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
)

// SegmentName returns the lower-case name of a segment as used in capture
// files and reports ("lead_upper_arm"), or "" for an unknown value.
func SegmentName(s kinchainv1.Segment) string {
	name, ok := kinchainv1.Segment_name[int32(s)]
	if !ok || s == kinchainv1.Segment_SEGMENT_UNSPECIFIED {
		return ""
	}
	return strings.ToLower(strings.TrimPrefix(name, "SEGMENT_"))
}

// SegmentLabel is the human form of a segment name ("lead upper arm").
func SegmentLabel(s kinchainv1.Segment) string {
	return strings.ReplaceAll(SegmentName(s), "_", " ")
}

// EventLabel is the human form of an event kind ("lead arm level (backswing)").
func EventLabel(k kinchainv1.EventKind) string {
	switch k {
	case kinchainv1.EventKind_EVENT_KIND_ADDRESS:
		return "address"
	case kinchainv1.EventKind_EVENT_KIND_TAKEAWAY:
		return "takeaway"
	case kinchainv1.EventKind_EVENT_KIND_LEAD_ARM_LEVEL_BACKSWING:
		return "lead arm level (back)"
	case kinchainv1.EventKind_EVENT_KIND_TOP:
		return "top"
	case kinchainv1.EventKind_EVENT_KIND_LEAD_ARM_LEVEL_DOWNSWING:
		return "lead arm level (down)"
	case kinchainv1.EventKind_EVENT_KIND_IMPACT:
		return "impact"
	case kinchainv1.EventKind_EVENT_KIND_FINISH:
		return "finish"
	}
	return "unknown"
}

func speedLabel(s kinchainv1.SpeedDefinition) string {
	switch s {
	case kinchainv1.SpeedDefinition_SPEED_DEFINITION_VERTICAL:
		return "vertical (about world z)"
	case kinchainv1.SpeedDefinition_SPEED_DEFINITION_LONG_AXIS:
		return "long-axis (about the segment's z)"
	}
	return "magnitude |ω|"
}

func handLabel(h kinchainv1.Handedness) string {
	if h == kinchainv1.Handedness_HANDEDNESS_LEFT {
		return "left-handed (mirrored to read as right-handed)"
	}
	return "right-handed"
}

// WriteText writes the analysis as a report for a person at a terminal:
// events, tempo, the kinematic sequence with gains, posture at the key
// events, and data quality.
func WriteText(w io.Writer, r *kinchainv1.AnalyzeCaptureResponse) error {
	p := &printer{w: w}
	id := r.GetCaptureId()
	if id == "" {
		id = "(no id)"
	}
	p.f("kinchain report — capture %s\n", id)
	p.f("  %s · %.0f Hz common rate · %.2f s from %.3f s · speed: %s\n",
		handLabel(r.GetHandedness()), r.GetSampleRateHz(), r.GetDurationS(), r.GetStartTimeS(), speedLabel(r.GetSpeed()))

	p.f("\nSegments over the whole capture\n")
	t := p.table()
	fmt.Fprintln(t, "  segment\ttrack Hz\tcutoff Hz\tpeak deg/s\tat s\t")
	for _, s := range r.GetSegments() {
		cut := "off"
		if s.GetCutoffHz() > 0 {
			cut = fmt.Sprintf("%.1f", s.GetCutoffHz())
		}
		fmt.Fprintf(t, "  %s\t%.1f\t%s\t%.1f\t%.3f\t\n", SegmentLabel(s.GetSegment()), s.GetSampleRateHz(), cut, s.GetPeakSpeedDegPerS(), s.GetPeakTimeS())
	}
	p.flush(t)

	if len(r.GetSwings()) == 0 {
		p.f("\nNo swing found.\n")
	}
	for _, sw := range r.GetSwings() {
		writeSwing(p, sw, len(r.GetSwings()))
	}
	writeQuality(p, r.GetQuality())
	return p.err
}

func writeSwing(p *printer, sw *kinchainv1.SwingReport, n int) {
	p.f("\nSwing %d of %d\n", sw.GetIndex()+1, n)
	var impact float64
	hasImpact := false
	for _, e := range sw.GetEvents() {
		if e.GetKind() == kinchainv1.EventKind_EVENT_KIND_IMPACT {
			impact, hasImpact = e.GetTimeS(), true
		}
	}
	p.f("  Events\n")
	t := p.table()
	fmt.Fprintln(t, "    event\ttime s\tfrom impact ms\t")
	for _, e := range sw.GetEvents() {
		rel := "—"
		if hasImpact {
			rel = fmt.Sprintf("%+.0f", (e.GetTimeS()-impact)*1000)
		}
		fmt.Fprintf(t, "    %s\t%.3f\t%s\t\n", EventLabel(e.GetKind()), e.GetTimeS(), rel)
	}
	p.flush(t)

	if tm := sw.GetTempo(); tm != nil && tm.GetDownswingS() > 0 {
		p.f("  Tempo: backswing %.3f s, downswing %.3f s, ratio %.1f : 1\n", tm.GetBackswingS(), tm.GetDownswingS(), tm.GetRatio())
	}

	if len(sw.GetSequence()) > 0 {
		p.f("  Kinematic sequence (downswing)\n")
		t = p.table()
		fmt.Fprintln(t, "    segment\tpeak deg/s\tpeak s\tfrom impact ms\tat impact deg/s\tdrop to impact %\t")
		for _, s := range sw.GetSequence() {
			fmt.Fprintf(t, "    %s\t%.1f\t%.3f\t%+.0f\t%.1f\t%.1f\t\n", SegmentLabel(s.GetSegment()), s.GetPeakSpeedDegPerS(),
				s.GetPeakTimeS(), s.GetTimeFromImpactMs(), s.GetSpeedAtImpactDegPerS(), s.GetDecelerationPct())
		}
		p.flush(t)
		order := make([]string, len(sw.GetPeakOrder()))
		for i, s := range sw.GetPeakOrder() {
			order[i] = SegmentLabel(s)
		}
		verdict := "no"
		if sw.GetProximalToDistal() {
			verdict = "yes"
		}
		p.f("    peak order: %s\n    proximal to distal: %s\n", strings.Join(order, " → "), verdict)
	}
	if len(sw.GetGains()) > 0 {
		p.f("  Speed gains between adjacent links\n")
		t = p.table()
		fmt.Fprintln(t, "    link\tratio\tgap deg/s\t")
		for _, g := range sw.GetGains() {
			fmt.Fprintf(t, "    %s → %s\t×%.2f\t%+.1f\t\n", SegmentLabel(g.GetProximal()), SegmentLabel(g.GetDistal()), g.GetRatio(), g.GetGapDegPerS())
		}
		p.flush(t)
	}
	if len(sw.GetTransitions()) > 0 {
		p.f("  Transitions (each segment's own reversal)\n")
		t = p.table()
		fmt.Fprintln(t, "    segment\ttime s\tfrom top ms\t")
		for _, tr := range sw.GetTransitions() {
			fmt.Fprintf(t, "    %s\t%.3f\t%+.0f\t\n", SegmentLabel(tr.GetSegment()), tr.GetTimeS(), tr.GetTimeFromTopMs())
		}
		p.flush(t)
	}
	writePostures(p, sw.GetPostures())
}

// writePostures prints one column per event at address, top and impact.
func writePostures(p *printer, ps []*kinchainv1.Posture) {
	var cols []*kinchainv1.Posture
	for _, want := range []kinchainv1.EventKind{kinchainv1.EventKind_EVENT_KIND_ADDRESS, kinchainv1.EventKind_EVENT_KIND_TOP, kinchainv1.EventKind_EVENT_KIND_IMPACT} {
		for _, q := range ps {
			if q.GetEvent() == want {
				cols = append(cols, q)
				break
			}
		}
	}
	if len(cols) == 0 {
		return
	}
	p.f("  Posture (deg)\n")
	t := p.table()
	fmt.Fprint(t, "    \t")
	for _, c := range cols {
		fmt.Fprintf(t, "%s\t", EventLabel(c.GetEvent()))
	}
	fmt.Fprintln(t)
	type row struct {
		label string
		get   func(*kinchainv1.Posture) (float64, bool)
	}
	body := func(name string, part func(*kinchainv1.Posture) *kinchainv1.BodyAngles) []row {
		return []row{
			{name + " axial rotation", func(q *kinchainv1.Posture) (float64, bool) {
				b := part(q)
				return b.GetAxialRotationDeg(), b != nil
			}},
			{name + " flexion", func(q *kinchainv1.Posture) (float64, bool) { b := part(q); return b.GetFlexionDeg(), b != nil }},
			{name + " lateral bend", func(q *kinchainv1.Posture) (float64, bool) { b := part(q); return b.GetLateralBendDeg(), b != nil }},
		}
	}
	var rows []row
	rows = append(rows, body("pelvis", (*kinchainv1.Posture).GetPelvis)...)
	rows = append(rows, body("thorax", (*kinchainv1.Posture).GetThorax)...)
	rows = append(rows, body("thorax–pelvis", (*kinchainv1.Posture).GetSeparation)...)
	rows = append(rows,
		row{"lead arm elevation", func(q *kinchainv1.Posture) (float64, bool) {
			a := q.GetLeadArm()
			return a.GetElevationDeg(), a != nil
		}},
		row{"lead arm plane of elevation", func(q *kinchainv1.Posture) (float64, bool) {
			a := q.GetLeadArm()
			return a.GetElevationPlaneDeg(), a != nil
		}},
		row{"lead wrist flexion", func(q *kinchainv1.Posture) (float64, bool) {
			a := q.GetLeadWrist()
			return a.GetFlexionDeg(), a != nil
		}},
		row{"lead wrist radial deviation", func(q *kinchainv1.Posture) (float64, bool) {
			a := q.GetLeadWrist()
			return a.GetRadialDeviationDeg(), a != nil
		}},
		row{"club shaft lean", func(q *kinchainv1.Posture) (float64, bool) {
			a := q.GetClub()
			return a.GetShaftLeanDeg(), a != nil
		}},
		row{"club shaft above ground", func(q *kinchainv1.Posture) (float64, bool) {
			a := q.GetClub()
			return a.GetShaftPlaneDeg(), a != nil
		}},
	)
	for _, r := range rows {
		any := false
		line := "    " + r.label + "\t"
		for _, c := range cols {
			v, ok := r.get(c)
			if ok && !math.IsNaN(v) {
				any = true
				line += fmt.Sprintf("%+.1f\t", v)
			} else {
				line += "—\t"
			}
		}
		if any {
			fmt.Fprintln(t, line)
		}
	}
	p.flush(t)
}

func writeQuality(p *printer, q *kinchainv1.Quality) {
	if q == nil {
		return
	}
	p.f("\nData quality\n")
	t := p.table()
	fmt.Fprintln(t, "  track\tsamples\trate Hz\tjitter ms\tgaps\tlongest gap ms\trenormalised\tflips\tsource\t")
	for _, tr := range q.GetTracks() {
		src := "quaternion"
		if tr.GetFused() {
			src = "fused IMU"
		}
		fmt.Fprintf(t, "  %s\t%d\t%.1f\t%.3f\t%d\t%.1f\t%d\t%d\t%s\t\n", SegmentLabel(tr.GetSegment()), tr.GetSamples(),
			tr.GetEffectiveRateHz(), tr.GetJitterMs(), tr.GetGaps(), tr.GetLongestGapMs(), tr.GetRenormalizedSamples(), tr.GetHemisphereFlips(), src)
	}
	p.flush(t)
	if len(q.GetWarnings()) == 0 {
		p.f("  no warnings\n")
		return
	}
	p.f("  Warnings\n")
	for _, w := range q.GetWarnings() {
		code := strings.ToLower(strings.TrimPrefix(w.GetCode().String(), "WARNING_CODE_"))
		where := ""
		if s := SegmentLabel(w.GetSegment()); s != "" {
			where = " [" + s + "]"
		}
		if w.TimeS != nil {
			where += fmt.Sprintf(" at %.3f s", w.GetTimeS())
		}
		p.f("    %s%s: %s\n", code, where, w.GetMessage())
	}
}

type printer struct {
	w   io.Writer
	err error
}

func (p *printer) f(format string, a ...any) {
	if p.err == nil {
		_, p.err = fmt.Fprintf(p.w, format, a...)
	}
}

func (p *printer) table() *tabwriter.Writer {
	return tabwriter.NewWriter(p.w, 0, 0, 2, ' ', 0)
}

func (p *printer) flush(t *tabwriter.Writer) {
	if err := t.Flush(); err != nil && p.err == nil {
		p.err = err
	}
}
