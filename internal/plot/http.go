package plot

import (
	"context"
	"errors"
	"fmt"
	"io"
	"mime"
	"net/http"
	"net/url"
	"slices"
	"sort"
	"strconv"
	"strings"

	"github.com/grpc-ecosystem/grpc-gateway/v2/runtime"
	"google.golang.org/genproto/googleapis/rpc/errdetails"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"
	"google.golang.org/protobuf/encoding/protojson"
	"google.golang.org/protobuf/reflect/protoreflect"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/httpbody"
	"github.com/kinchain/kinchain/internal/validate"
)

// Analyzer is the analysis engine as the plot endpoint sees it
// (*engine.Engine satisfies it).
type Analyzer interface {
	// Analyze validates and analyses a request.
	Analyze(ctx context.Context, req *kinchainv1.AnalyzeCaptureRequest) (*kinchainv1.AnalyzeCaptureResponse, error)
	// AnalyzeCSV decodes a capture in the CSV capture format from r and
	// analyses it.
	AnalyzeCSV(ctx context.Context, r io.Reader, opts *kinchainv1.AnalysisOptions) (*kinchainv1.AnalyzeCaptureResponse, error)
}

// HandlerConfig configures Handler. The zero value uses the defaults; the
// server passes its own QueryOptions and WriteError so that the plot
// endpoint reads options and reports errors exactly as :analyze does.
type HandlerConfig struct {
	// MaxBodyBytes bounds the request body (default
	// validate.DefaultMaxBytes, 64 MiB); a larger body gets 413.
	MaxBodyBytes int64
	// QueryOptions reads the AnalysisOptions of a CSV request from its query
	// parameters (the plot's own parameters already removed). Default: each
	// parameter is an AnalysisOptions field path by proto or JSON name
	// (cutoff_hz or cutoffHz, neutral.start_s), parsed as the JSON gateway
	// parses query parameters (enums by full name or number); an unknown,
	// repeated or malformed parameter is an *InputError naming it.
	QueryOptions func(url.Values) (*kinchainv1.AnalysisOptions, error)
	// WriteError writes an error response. It is given gRPC status errors
	// (bad input: INVALID_ARGUMENT with errdetails.BadRequest field
	// violations), *runtime.HTTPStatusError for statuses that no gRPC code
	// maps to (406, 413, 415, 405), and the Analyzer's errors unchanged.
	// Default: the JSON of the google.rpc.Status (proto field names) with
	// the HTTP status of its code, as the gateway writes it; *validate.Error
	// values become INVALID_ARGUMENT with field violations, context errors
	// CANCELED or DEADLINE_EXCEEDED, anything else INTERNAL (its text not
	// shown).
	WriteError func(w http.ResponseWriter, r *http.Request, err error)
}

// Plot query parameters; every other query parameter of a CSV request is an
// AnalysisOptions field.
const (
	paramSwing      = "swing"       // 0-based swing index, default 0
	paramWidth      = "width"       // image width, px
	paramFromMs     = "from_ms"     // window start relative to impact, ms
	paramToMs       = "to_ms"       // window end relative to impact, ms
	paramSegments   = "segments"    // comma-separated segment names
	paramEmbedFonts = "embed_fonts" // true: embed fonts in SVG
)

var plotParams = []string{paramSwing, paramWidth, paramFromMs, paramToMs, paramSegments, paramEmbedFonts}

// Handler serves POST /v1/captures:plot: the same bodies as
// /v1/captures:analyze (the protojson of AnalyzeCaptureRequest, or a capture
// as text/csv with the analysis options as query parameters named like the
// AnalysisOptions fields, e.g. ?cutoff_hz=12&speed=SPEED_DEFINITION_VERTICAL),
// analysed with include_series forced on, answered with the picture of one
// swing as image/svg+xml or image/png, chosen by the Accept header (SVG when
// it is absent or accepts anything).
//
// Plot query parameters: swing (0-based, default 0), width (px, default 800),
// from_ms and to_ms (the window relative to impact, both or neither),
// segments (comma-separated, e.g. pelvis,thorax,club) and embed_fonts.
//
// Errors are the JSON of a google.rpc.Status, as the gateway writes them:
// bad input is 400 with a BadRequest field violation naming the field or
// parameter, an Accept the handler cannot satisfy 406, an unknown body type
// 415, an oversized body 413, a method other than POST 405.
func Handler(a Analyzer, cfg HandlerConfig) http.Handler {
	if cfg.MaxBodyBytes <= 0 {
		cfg.MaxBodyBytes = validate.DefaultMaxBytes
	}
	if cfg.QueryOptions == nil {
		cfg.QueryOptions = queryOptions
	}
	if cfg.WriteError == nil {
		cfg.WriteError = writeError
	}
	return &handler{a: a, cfg: cfg}
}

type handler struct {
	a   Analyzer
	cfg HandlerConfig
}

func (h *handler) ServeHTTP(w http.ResponseWriter, r *http.Request) {
	if r.Method != http.MethodPost {
		w.Header().Set("Allow", http.MethodPost)
		h.fail(w, r, http.StatusMethodNotAllowed, status.Error(codes.Unimplemented, r.Method+" is not supported; use POST"))
		return
	}
	w.Header().Set("Vary", "Accept")
	format, ok := negotiate(r.Header.Values("Accept"))
	if !ok {
		h.fail(w, r, http.StatusNotAcceptable, violation(codes.InvalidArgument, "Accept", "NOT_ACCEPTABLE",
			"none of %q is image/svg+xml or image/png", strings.Join(r.Header.Values("Accept"), ", ")))
		return
	}
	q := r.URL.Query()
	swing, opt, err := plotOptions(q)
	if err != nil {
		h.fail(w, r, 0, err)
		return
	}
	opt.Format = format

	kind, r := httpbody.Classify(r)
	if kind == httpbody.Unsupported {
		h.fail(w, r, http.StatusUnsupportedMediaType, violation(codes.InvalidArgument, "Content-Type", "UNSUPPORTED_MEDIA_TYPE",
			"%q is not application/json or text/csv", r.Header.Get("Content-Type")))
		return
	}
	csv := kind == httpbody.CSV
	body := http.MaxBytesReader(w, r.Body, h.cfg.MaxBodyBytes)
	var resp *kinchainv1.AnalyzeCaptureResponse
	if csv {
		rest := url.Values{}
		for key, vs := range q {
			if !slices.Contains(plotParams, key) {
				rest[key] = vs
			}
		}
		opts, err := h.cfg.QueryOptions(rest)
		if err != nil {
			h.fail(w, r, 0, err)
			return
		}
		opts.IncludeSeries = true
		if resp, err = h.a.AnalyzeCSV(r.Context(), body, opts); err != nil {
			h.fail(w, r, 0, err)
			return
		}
	} else {
		for key := range q {
			if !slices.Contains(plotParams, key) {
				h.fail(w, r, 0, &InputError{Field: key, Reason: "unknown query parameter (with a JSON body the analysis options go in its \"options\" field)"})
				return
			}
		}
		b, err := io.ReadAll(body)
		if err != nil {
			h.fail(w, r, 0, err)
			return
		}
		req := &kinchainv1.AnalyzeCaptureRequest{}
		if err := protojson.Unmarshal(b, req); err != nil {
			h.fail(w, r, 0, violation(codes.InvalidArgument, "body", "MALFORMED_BODY", "not the JSON of an AnalyzeCaptureRequest: %v", err))
			return
		}
		if req.Options == nil {
			req.Options = &kinchainv1.AnalysisOptions{}
		}
		req.Options.IncludeSeries = true
		if resp, err = h.a.Analyze(r.Context(), req); err != nil {
			h.fail(w, r, 0, err)
			return
		}
	}

	img, err := Render(resp, swing, opt)
	if err != nil {
		h.fail(w, r, 0, err)
		return
	}
	w.Header().Set("Content-Type", format.ContentType())
	w.Header().Set("Content-Length", strconv.Itoa(len(img)))
	w.WriteHeader(http.StatusOK)
	_, _ = w.Write(img)
}

// fail reports err through cfg.WriteError: an *InputError becomes
// INVALID_ARGUMENT naming its field, a body over MaxBodyBytes 413, and a
// non-zero httpStatus is attached as a *runtime.HTTPStatusError.
func (h *handler) fail(w http.ResponseWriter, r *http.Request, httpStatus int, err error) {
	var (
		ie     *InputError
		tooBig *http.MaxBytesError
	)
	switch {
	case errors.As(err, &ie):
		err = violation(codes.InvalidArgument, ie.Field, "INVALID_VALUE", "%s", ie.Reason)
	case errors.As(err, &tooBig):
		httpStatus = http.StatusRequestEntityTooLarge
		err = violation(codes.InvalidArgument, "body", "BODY_TOO_LARGE", "the request body exceeds the limit of %d bytes", tooBig.Limit)
	}
	if httpStatus != 0 {
		err = &runtime.HTTPStatusError{HTTPStatus: httpStatus, Err: err}
	}
	h.cfg.WriteError(w, r, err)
}

// violation is a status error whose message is "field: description" and
// whose detail is one BadRequest field violation.
func violation(c codes.Code, field, reason, format string, a ...any) error {
	desc := fmt.Sprintf(format, a...)
	st := status.New(c, field+": "+desc)
	if d, err := st.WithDetails(&errdetails.BadRequest{FieldViolations: []*errdetails.BadRequest_FieldViolation{
		{Field: field, Description: desc, Reason: reason},
	}}); err == nil {
		st = d
	}
	return st.Err()
}

// writeError is HandlerConfig.WriteError's default.
func writeError(w http.ResponseWriter, _ *http.Request, err error) {
	code := 0
	var hs *runtime.HTTPStatusError
	if errors.As(err, &hs) {
		code, err = hs.HTTPStatus, hs.Err
	}
	st := status.Convert(mapError(err))
	if code == 0 {
		code = runtime.HTTPStatusFromCode(st.Code())
	}
	b, merr := protojson.MarshalOptions{UseProtoNames: true}.Marshal(st.Proto())
	if merr != nil {
		b = []byte(`{"code":13,"message":"internal error"}`)
	}
	w.Header().Set("Content-Type", "application/json")
	w.Header().Set("Content-Length", strconv.Itoa(len(b)))
	w.WriteHeader(code)
	_, _ = w.Write(b)
}

// mapError turns an error that is not a status error into one (see
// HandlerConfig.WriteError).
func mapError(err error) error {
	if _, ok := err.(interface{ GRPCStatus() *status.Status }); ok {
		return err
	}
	switch {
	case errors.Is(err, context.Canceled):
		return status.Error(codes.Canceled, "request canceled")
	case errors.Is(err, context.DeadlineExceeded):
		return status.Error(codes.DeadlineExceeded, "deadline exceeded before the analysis finished")
	}
	ves := validate.Errors(err, 100)
	if len(ves) == 0 {
		return status.Error(codes.Internal, "internal error")
	}
	br := &errdetails.BadRequest{}
	for _, ve := range ves {
		field := ve.Field
		if ve.Sample >= 0 && field != "" && !strings.HasSuffix(field, "]") {
			field = fmt.Sprintf("%s[%d]", field, ve.Sample)
		}
		br.FieldViolations = append(br.FieldViolations, &errdetails.BadRequest_FieldViolation{
			Field: field, Description: ve.Error(), Reason: strings.ToUpper(string(ve.Reason)),
		})
	}
	st := status.New(codes.InvalidArgument, ves[0].Error())
	if d, err := st.WithDetails(br); err == nil {
		st = d
	}
	return st.Err()
}

// negotiate picks the image format from the Accept header values: the
// acceptable media range with the highest q (ties: the first listed);
// image/* and */* and no header at all mean SVG.
func negotiate(values []string) (Format, bool) {
	type option struct {
		f Format
		q float64
		i int
	}
	var opts []option
	n := 0
	for _, v := range values {
		for _, part := range strings.Split(v, ",") {
			part = strings.TrimSpace(part)
			if part == "" {
				continue
			}
			n++
			mt, params, err := mime.ParseMediaType(part)
			if err != nil {
				continue
			}
			q := 1.0
			if s, ok := params["q"]; ok {
				if q, err = strconv.ParseFloat(s, 64); err != nil || q < 0 || q > 1 {
					continue
				}
			}
			if q == 0 {
				continue
			}
			switch mt {
			case "image/svg+xml", "image/*", "*/*":
				opts = append(opts, option{FormatSVG, q, len(opts)})
			case "image/png":
				opts = append(opts, option{FormatPNG, q, len(opts)})
			}
		}
	}
	if n == 0 {
		return FormatSVG, true
	}
	if len(opts) == 0 {
		return "", false
	}
	sort.SliceStable(opts, func(a, b int) bool { return opts[a].q > opts[b].q })
	return opts[0].f, true
}

// plotOptions reads the plot query parameters.
func plotOptions(q url.Values) (int, Options, error) {
	var opt Options
	swing := 0
	one := func(key string) (string, bool, error) {
		vs, ok := q[key]
		switch {
		case !ok:
			return "", false, nil
		case len(vs) != 1:
			return "", false, &InputError{Field: key, Reason: "given more than once"}
		}
		return vs[0], true, nil
	}
	num := func(key string, set func(float64)) error {
		s, ok, err := one(key)
		if err != nil || !ok {
			return err
		}
		v, err := strconv.ParseFloat(s, 64)
		if err != nil || !finite(v) {
			return inputErrorf(key, "%q is not a number", s)
		}
		set(v)
		return nil
	}
	intParam := func(key string, set func(int)) error {
		s, ok, err := one(key)
		if err != nil || !ok {
			return err
		}
		v, err := strconv.Atoi(s)
		if err != nil {
			return inputErrorf(key, "%q is not an integer", s)
		}
		set(v)
		return nil
	}
	if err := intParam(paramSwing, func(v int) { swing = v }); err != nil {
		return 0, opt, err
	}
	if err := intParam(paramWidth, func(v int) { opt.WidthPx = v }); err != nil {
		return 0, opt, err
	}
	_, hasFrom := q[paramFromMs]
	_, hasTo := q[paramToMs]
	if hasFrom != hasTo {
		return 0, opt, inputErrorf(paramFromMs, "give from_ms and to_ms together")
	}
	if err := num(paramFromMs, func(v float64) { opt.FromMs = v }); err != nil {
		return 0, opt, err
	}
	if err := num(paramToMs, func(v float64) { opt.ToMs = v }); err != nil {
		return 0, opt, err
	}
	if s, ok, err := one(paramSegments); err != nil {
		return 0, opt, err
	} else if ok {
		segs, err := ParseSegments(s)
		if err != nil {
			return 0, opt, &InputError{Field: paramSegments, Reason: err.Error()}
		}
		opt.Segments = segs
	}
	if s, ok, err := one(paramEmbedFonts); err != nil {
		return 0, opt, err
	} else if ok {
		b, err := strconv.ParseBool(s)
		if err != nil {
			return 0, opt, inputErrorf(paramEmbedFonts, "%q is not true or false", s)
		}
		opt.EmbedFonts = b
	}
	return swing, opt, nil
}

// ParseSegments parses a comma-separated list of segment names as the CSV
// capture format spells them ("pelvis,thorax,lead_upper_arm,club"; the enum
// names SEGMENT_PELVIS... are accepted too).
func ParseSegments(s string) ([]kinchainv1.Segment, error) {
	var out []kinchainv1.Segment
	for _, name := range strings.Split(s, ",") {
		name = strings.TrimSpace(name)
		if name == "" {
			continue
		}
		key := strings.ToUpper(strings.ReplaceAll(name, "-", "_"))
		if !strings.HasPrefix(key, "SEGMENT_") {
			key = "SEGMENT_" + key
		}
		v, ok := kinchainv1.Segment_value[key]
		if !ok || v == 0 {
			return nil, fmt.Errorf("%q is not a segment", name)
		}
		out = append(out, kinchainv1.Segment(v))
	}
	if len(out) == 0 {
		return nil, errors.New("no segment named")
	}
	return out, nil
}

// queryOptions is HandlerConfig.QueryOptions' default: each parameter is a
// field path of AnalysisOptions by its proto or JSON name (cutoff_hz or
// cutoffHz, neutral.start_s), parsed the way the JSON gateway parses query
// parameters (enums by name or number).
func queryOptions(q url.Values) (*kinchainv1.AnalysisOptions, error) {
	opts := &kinchainv1.AnalysisOptions{}
	keys := make([]string, 0, len(q))
	for key := range q {
		keys = append(keys, key)
	}
	sort.Strings(keys)
	seen := map[string]string{}
	for _, key := range keys {
		path, ok := optionPath(opts.ProtoReflect().Descriptor(), key)
		if !ok {
			return nil, inputErrorf(key, "unknown query parameter: neither a plot parameter (%s) nor an AnalysisOptions field", strings.Join(plotParams, ", "))
		}
		if prev, dup := seen[path]; dup {
			return nil, inputErrorf(key, "sets the same option as %s", prev)
		}
		seen[path] = key
		if len(q[key]) != 1 {
			return nil, inputErrorf(key, "given more than once")
		}
		if err := runtime.PopulateFieldFromPath(opts, path, q[key][0]); err != nil {
			return nil, inputErrorf(key, "%q: %v", q[key][0], err)
		}
	}
	return opts, nil
}

// optionPath resolves a dotted field path of proto or JSON names to the
// proto names, for singular scalar, enum or nested-message fields.
func optionPath(md protoreflect.MessageDescriptor, key string) (string, bool) {
	parts := strings.Split(key, ".")
	names := make([]string, len(parts))
	for i, p := range parts {
		fd := md.Fields().ByTextName(p)
		if fd == nil {
			fd = md.Fields().ByJSONName(p)
		}
		if fd == nil || fd.IsList() || fd.IsMap() {
			return "", false
		}
		names[i] = string(fd.Name())
		last := i == len(parts)-1
		if fd.Kind() == protoreflect.MessageKind {
			if last {
				return "", false
			}
			md = fd.Message()
			continue
		}
		if !last {
			return "", false
		}
	}
	return strings.Join(names, "."), true
}
