// Package engine is kinchain's single entry point: a capture and options in,
// the full analysis out. The CLI and the server both call it, so neither
// holds analysis logic.
//
// The stages run in one direction: validate → (fuse raw IMU tracks) →
// condition → kinematics → swing → assemble the response.
package engine

import (
	"context"
	"io"
	"math"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/capture"
	"github.com/kinchain/kinchain/internal/condition"
	"github.com/kinchain/kinchain/internal/decode"
	"github.com/kinchain/kinchain/internal/fusion"
	"github.com/kinchain/kinchain/internal/kinematics"
	"github.com/kinchain/kinchain/internal/swing"
	"github.com/kinchain/kinchain/internal/validate"
)

// Config configures an Engine. The zero value uses the documented defaults.
type Config struct {
	// Limits bound the size of the captures accepted.
	Limits validate.Limits
}

// Engine analyses captures. It holds no per-request state and is safe for
// concurrent use.
type Engine struct {
	lim validate.Limits
}

// New returns an Engine.
func New(cfg Config) *Engine {
	return &Engine{lim: cfg.Limits}
}

// Limits returns the limits the engine enforces.
func (e *Engine) Limits() validate.Limits { return e.lim }

// Analyze validates and analyses a request. Bad input yields a
// *validate.Error naming the field and sample.
func (e *Engine) Analyze(ctx context.Context, req *kinchainv1.AnalyzeCaptureRequest) (*kinchainv1.AnalyzeCaptureResponse, error) {
	return e.AnalyzeDecoded(ctx, req, nil)
}

// AnalyzeCSV decodes a capture in the CSV format from r and analyses it.
// Errors name the field and the file line.
func (e *Engine) AnalyzeCSV(ctx context.Context, r io.Reader, opts *kinchainv1.AnalysisOptions) (*kinchainv1.AnalyzeCaptureResponse, error) {
	pc, loc, err := decode.CSV(r, e.lim)
	if err != nil {
		return nil, err
	}
	return e.AnalyzeDecoded(ctx, &kinchainv1.AnalyzeCaptureRequest{Capture: pc, Options: opts}, loc)
}

// AnalyzeDecoded validates a decoded request and analyses it; loc, when
// non-nil, maps samples to the lines of the file they came from so that
// errors can name them.
func (e *Engine) AnalyzeDecoded(ctx context.Context, req *kinchainv1.AnalyzeCaptureRequest, loc validate.Locator) (*kinchainv1.AnalyzeCaptureResponse, error) {
	c, err := validate.Request(req, e.lim, loc)
	if err != nil {
		return nil, err
	}
	return e.analyze(ctx, c, req.GetOptions())
}

// AnalyzeValidated analyses an already validated capture with options that
// are checked here. It modifies c (fusion fills in orientations of raw IMU
// tracks; option overrides of handedness and neutral window are applied).
func (e *Engine) AnalyzeValidated(ctx context.Context, c *capture.Capture, opts *kinchainv1.AnalysisOptions) (*kinchainv1.AnalyzeCaptureResponse, error) {
	if err := validate.OptionsWithin(opts, e.lim); err != nil {
		return nil, err
	}
	return e.analyze(ctx, c, opts)
}

func (e *Engine) analyze(ctx context.Context, c *capture.Capture, opts *kinchainv1.AnalysisOptions) (*kinchainv1.AnalyzeCaptureResponse, error) {
	if opts == nil {
		opts = &kinchainv1.AnalysisOptions{}
	}
	if h := opts.GetHandedness(); h != kinchainv1.Handedness_HANDEDNESS_UNSPECIFIED {
		c.Handedness = h
	}
	if w := opts.GetNeutral(); w != nil {
		c.Neutral = &capture.Window{Start: w.GetStartS(), End: w.GetEndS()}
	}
	var warnings []*kinchainv1.Warning
	fused, fw, err := fuse(c, opts)
	if err != nil {
		return nil, err
	}
	warnings = append(warnings, fw...)
	if err := ctx.Err(); err != nil {
		return nil, err
	}

	cond, err := condition.Run(c, condition.Options{Rate: opts.GetRateHz()})
	if err != nil {
		return nil, err
	}
	warnings = append(warnings, cond.Warnings...)
	for i := range cond.Segments {
		rep, ok := fused[cond.Segments[i].Segment]
		if q := cond.Segments[i].Quality; ok && q != nil {
			q.Fused = true
			q.GyroSaturationSuspected = q.GyroSaturationSuspected || rep.GyroSaturated()
			q.AccelClippingSuspected = q.AccelClippingSuspected || rep.AccelClipped()
		}
	}
	if err := ctx.Err(); err != nil {
		return nil, err
	}

	kin, err := kinematics.Compute(cond, kinematicsOptions(opts))
	if err != nil {
		return nil, err
	}
	warnings = append(warnings, kin.Warnings...)

	sopt := swing.Options{Handedness: c.Handedness}
	if c.TargetHeading != nil {
		h := *c.TargetHeading
		sopt.TargetHeading = &h
	}
	swings, sw := swing.Analyze(kin, sopt)
	warnings = append(warnings, sw...)

	resp := &kinchainv1.AnalyzeCaptureResponse{
		CaptureId:    c.ID,
		SampleRateHz: cond.Grid.Rate,
		StartTimeS:   cond.Grid.Start,
		DurationS:    float64(cond.Grid.N-1) / cond.Grid.Rate,
		Handedness:   handedness(c.Handedness),
		Speed:        speed(opts.GetSpeed()),
		Swings:       swings,
		Quality:      &kinchainv1.Quality{Warnings: warnings},
	}
	for i := range kin.Segments {
		ks := &kin.Segments[i]
		sk := &kinchainv1.SegmentKinematics{
			Segment:      ks.Segment,
			SampleRateHz: tidyRate(ks.SourceRate),
			CutoffHz:     ks.Cutoff,
		}
		if p, ok := kinematics.PeakSpeedIn(ks, 0, len(ks.Speed)); ok {
			sk.PeakSpeedDegPerS = deg(p.Value)
			sk.PeakTimeS = p.Time(kin.Grid)
		}
		if opts.GetIncludeSeries() {
			sk.Series = series(kin.Grid, ks)
		}
		resp.Segments = append(resp.Segments, sk)
	}
	for i := range cond.Segments {
		if q := cond.Segments[i].Quality; q != nil {
			q.EffectiveRateHz = tidyRate(q.EffectiveRateHz)
			resp.Quality.Tracks = append(resp.Quality.Tracks, q)
		}
	}
	return resp, nil
}

// fuse estimates orientations for tracks that carry raw IMU readings only,
// or for every track with raw readings when the options ask for fusion.
func fuse(c *capture.Capture, opts *kinchainv1.AnalysisOptions) (map[kinchainv1.Segment]fusion.Report, []*kinchainv1.Warning, error) {
	done := map[kinchainv1.Segment]fusion.Report{}
	var warnings []*kinchainv1.Warning
	force := opts.GetOrientationSource() == kinchainv1.OrientationSource_ORIENTATION_SOURCE_FUSION
	for i := range c.Tracks {
		t := &c.Tracks[i]
		raw := t.Gyro != nil && t.Accel != nil
		if !(t.Q == nil || (force && raw)) {
			continue
		}
		rep, err := fusion.Track(t, fusion.Options{
			IgnoreMag:  opts.GetFusionIgnoreMagnetometer(),
			GyroRange:  opts.GetGyroRangeDps() * math.Pi / 180,            // 0: fusion's default
			AccelRange: opts.GetAccelRangeG() * condition.StandardGravity, // 0: fusion's default
		})
		if err != nil {
			return nil, nil, err
		}
		warnings = append(warnings, rep.Warnings(t.Segment)...)
		done[t.Segment] = rep
	}
	return done, warnings, nil
}

func kinematicsOptions(o *kinchainv1.AnalysisOptions) kinematics.Options {
	k := kinematics.Options{
		Order:    int(o.GetFilterOrder()),
		Residual: o.GetResidualCutoff(),
		Speed:    speed(o.GetSpeed()),
		Source:   o.GetAngularVelocitySource(),
	}
	if o.CutoffHz != nil {
		v := o.GetCutoffHz()
		k.Cutoff = &v
	}
	return k
}

func series(g condition.Grid, s *kinematics.Segment) *kinchainv1.Series {
	n := len(s.Speed)
	out := &kinchainv1.Series{
		TimeS:        make([]float64, n),
		WxDegPerS:    make([]float64, n),
		WyDegPerS:    make([]float64, n),
		WzDegPerS:    make([]float64, n),
		SpeedDegPerS: make([]float64, n),
	}
	for i := 0; i < n; i++ {
		out.TimeS[i] = g.Time(i)
		out.WxDegPerS[i] = deg(s.Omega[i].X)
		out.WyDegPerS[i] = deg(s.Omega[i].Y)
		out.WzDegPerS[i] = deg(s.Omega[i].Z)
		out.SpeedDegPerS[i] = deg(s.Speed[i])
	}
	return out
}

func speed(s kinchainv1.SpeedDefinition) kinchainv1.SpeedDefinition {
	if s == kinchainv1.SpeedDefinition_SPEED_DEFINITION_UNSPECIFIED {
		return kinchainv1.SpeedDefinition_SPEED_DEFINITION_MAGNITUDE
	}
	return s
}

func handedness(h kinchainv1.Handedness) kinchainv1.Handedness {
	if h == kinchainv1.Handedness_HANDEDNESS_UNSPECIFIED {
		return kinchainv1.Handedness_HANDEDNESS_RIGHT
	}
	return h
}

// tidyRate rounds a rate measured from float sample times to a whole number
// of Hz when it is within 1 ppm of one (999.9999999999991 → 1000).
func tidyRate(r float64) float64 {
	if n := math.Round(r); math.Abs(r-n) <= 1e-6*r {
		return n
	}
	return r
}

func deg(rad float64) float64 { return rad * 180 / math.Pi }
