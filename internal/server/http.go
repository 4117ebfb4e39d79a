package server

import (
	"bytes"
	"context"
	"errors"
	"io"
	"log/slog"
	"mime"
	"net/http"
	"strconv"
	"strings"
	"sync/atomic"
	"time"

	"github.com/grpc-ecosystem/grpc-gateway/v2/runtime"
	"google.golang.org/genproto/googleapis/rpc/errdetails"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"
	"google.golang.org/protobuf/encoding/protojson"
	"google.golang.org/protobuf/proto"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/api/openapi"
	"github.com/kinchain/kinchain/internal/decode"
	"github.com/kinchain/kinchain/internal/httpbody"
	"github.com/kinchain/kinchain/internal/validate"
)

// Routes of the HTTP listener (the route label of the HTTP metrics).
const (
	routeAnalyze = "/v1/captures:analyze"
	routeOpenAPI = "/openapi.json"
	routeHealthz = "/healthz"
	routeReadyz  = "/readyz"
	routeOther   = "other"
)

// gatewayMarshaler writes and reads protojson with the proto field names,
// as the OpenAPI document describes them; reading also accepts the
// lowerCamelCase JSON names and rejects unknown fields.
var gatewayMarshaler = &protoJSON{runtime.JSONPb{
	MarshalOptions:   protojson.MarshalOptions{UseProtoNames: true},
	UnmarshalOptions: protojson.UnmarshalOptions{DiscardUnknown: false},
}}

// protoJSON is runtime.JSONPb with a faster request decoder: the body is
// read whole (it is bounded by the body limit) and decoded at once, instead
// of being scanned by encoding/json into a RawMessage first and parsed
// again; an AnalyzeCaptureRequest goes through decodeRequestJSON's fast
// path for sample arrays (see fastjson.go and DEVELOPERS.md, Service,
// "HTTP gateway").
type protoJSON struct{ runtime.JSONPb }

// NewDecoder returns a decoder that reads r to the end and unmarshals it;
// an empty body is io.EOF (an empty request, as the gateway expects).
func (m *protoJSON) NewDecoder(r io.Reader) runtime.Decoder {
	return runtime.DecoderFunc(func(v any) error {
		jb, _ := r.(*jsonBody)
		var b []byte
		if jb != nil {
			b = jb.b
		} else {
			var err error
			if b, err = io.ReadAll(r); err != nil {
				return err
			}
		}
		if len(bytes.TrimSpace(b)) == 0 {
			return io.EOF
		}
		if req, ok := v.(*kinchainv1.AnalyzeCaptureRequest); ok {
			err := decodeRequestChecked(b, m.UnmarshalOptions, req)
			if err != nil && jb != nil {
				jb.err = err
			}
			return err
		}
		pm, ok := v.(proto.Message)
		if !ok {
			return m.JSONPb.Unmarshal(b, v)
		}
		return m.UnmarshalOptions.Unmarshal(b, pm)
	})
}

// jsonBody is an analyze request's JSON body, read whole by analyzeHTTP
// and handed to the gateway. The decoder reads it without copying and
// leaves the typed decoding error here, where gatewayError finds it
// (the generated gateway code keeps only the error's text).
type jsonBody struct {
	b   []byte
	r   *bytes.Reader
	err error
}

func (j *jsonBody) Read(p []byte) (int, error) { return j.r.Read(p) }
func (j *jsonBody) Close() error               { return nil }

type jsonBodyKey struct{}

// decodeRequestChecked decodes an AnalyzeCaptureRequest from protojson b
// with the fast path (fastjson.go). Two checks come from decode's JSON
// reader (decode.JSONRequest): a body with more objects than a capture
// within the default limits can hold is walked first, so that many small
// tracks are refused (too_large) before they are allocated; and when
// decoding fails, the error is decode's *validate.Error naming the field,
// sample and line (capture.tracks[0].qw, line 12) instead of protojson's
// text.
func decodeRequestChecked(b []byte, opts protojson.UnmarshalOptions, req *kinchainv1.AnalyzeCaptureRequest) error {
	if bytes.Count(b, []byte("{")) > 4*validate.DefaultMaxTracks+16 {
		if _, err := decode.JSONRequest(b); err != nil {
			return err
		}
	}
	err := decodeRequestJSON(b, opts, req)
	if err == nil {
		return nil
	}
	if _, derr := decode.JSONRequest(b); derr != nil {
		return derr
	}
	return err
}

// captureFields are the proto and JSON names of Capture's fields.
var captureFields = func() map[string]bool {
	m := map[string]bool{}
	fs := (&kinchainv1.Capture{}).ProtoReflect().Descriptor().Fields()
	for i := 0; i < fs.Len(); i++ {
		m[string(fs.Get(i).Name())], m[fs.Get(i).JSONName()] = true, true
	}
	return m
}()

// bareCapture reports whether JSON b is a Capture sent without the request
// around it: an object whose first member is a Capture field (capture_id,
// tracks, …; AnalyzeCaptureRequest has none of these). Only the first key
// is looked at, so a truncated or otherwise broken capture is still read
// as a capture and its error named inside it.
func bareCapture(b []byte) bool {
	i := skipSpace(b, 0)
	if i >= len(b) || b[i] != '{' {
		return false
	}
	k, _, ok := plainKey(b, skipSpace(b, i+1))
	return ok && captureFields[k]
}

// newHTTPHandler builds the HTTP listener's mux: the gateway (registered
// in-process, see DEVELOPERS.md, Performance, "Service", for the
// measurement behind that choice), CSV uploads on the same path, the
// OpenAPI document and the probes.
func (s *Server) newHTTPHandler() error {
	s.gw = runtime.NewServeMux(
		runtime.WithErrorHandler(s.gatewayError),
		runtime.WithMarshalerOption(runtime.MIMEWildcard, gatewayMarshaler),
		runtime.WithDisableHTTPMethodOverride(),
	)
	if err := kinchainv1.RegisterKinematicsServiceHandlerServer(context.Background(), s.gw, s.svc); err != nil {
		return err
	}
	s.httpMux = http.NewServeMux()
	s.allow = map[string][]string{}
	analyze := http.HandlerFunc(s.analyzeHTTP)
	s.handle(http.MethodPost, routeAnalyze, true, analyze)
	s.handle(http.MethodPut, routeAnalyze, true, analyze)
	s.handle(http.MethodGet, routeOpenAPI, false, http.HandlerFunc(func(w http.ResponseWriter, _ *http.Request) {
		w.Header().Set("Content-Type", "application/json")
		_, _ = w.Write(openapi.JSON)
	}))
	s.handle(http.MethodGet, routeHealthz, false, http.HandlerFunc(s.healthz))
	s.handle(http.MethodGet, routeReadyz, false, http.HandlerFunc(s.readyz))
	s.httpMux.Handle("/", s.route(routeOther, false, http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		s.WriteHTTPError(w, r, status.Errorf(codes.NotFound, "no route for %s %s", r.Method, r.URL.Path))
	})))
	return nil
}

// healthMux is the health listener's handler: the two probes only.
func (s *Server) healthMux() http.Handler {
	mux := http.NewServeMux()
	mux.Handle("GET "+routeHealthz, s.route(routeHealthz, false, http.HandlerFunc(s.healthz)))
	mux.Handle("GET "+routeReadyz, s.route(routeReadyz, false, http.HandlerFunc(s.readyz)))
	return mux
}

func (s *Server) healthz(w http.ResponseWriter, _ *http.Request) {
	writeJSON(w, http.StatusOK, `{"status":"alive"}`)
}

func (s *Server) readyz(w http.ResponseWriter, _ *http.Request) {
	if s.ready.Load() {
		writeJSON(w, http.StatusOK, `{"status":"ready"}`)
		return
	}
	writeJSON(w, http.StatusServiceUnavailable, `{"status":"not ready"}`)
}

// handle registers h for method and path with the route middleware, and
// a path-only fallback answering 405 with the Allow header for the other
// methods (the catch-all "/" would otherwise answer 404).
func (s *Server) handle(method, path string, limited bool, h http.Handler) {
	s.allowMu.Lock()
	defer s.allowMu.Unlock()
	s.httpMux.Handle(method+" "+path, s.route(path, limited, h))
	first := len(s.allow[path]) == 0
	s.allow[path] = append(s.allow[path], method)
	if !first {
		return
	}
	s.httpMux.Handle(path, s.route(path, false, http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		s.allowMu.Lock()
		allow := strings.Join(s.allow[path], ", ")
		s.allowMu.Unlock()
		w.Header().Set("Allow", allow)
		s.WriteHTTPError(w, r, &runtime.HTTPStatusError{HTTPStatus: http.StatusMethodNotAllowed,
			Err: status.Errorf(codes.Unimplemented, "%s %s: method not allowed; use %s", r.Method, path, allow)})
	})))
}

// HandleHTTP registers an extra handler on the HTTP listener (e.g.
// "POST /v1/captures:plot"), with the same middleware as the analyze route:
// request id, logging, metrics (route label: the pattern's path), panic
// recovery, the body limit, the default deadline and the
// concurrent-requests limit. It may be called before or while serving and
// panics, like http.ServeMux.Handle, on a conflicting pattern.
func (s *Server) HandleHTTP(pattern string, h http.Handler) {
	method, path, ok := strings.Cut(strings.TrimSpace(pattern), " ")
	if !ok || strings.HasPrefix(method, "/") {
		s.httpMux.Handle(pattern, s.route(pattern, true, h))
		return
	}
	s.handle(method, strings.TrimSpace(path), true, h)
}

// bodyKind tells how analyzeHTTP reads a body.
type bodyKind int

const (
	bodyJSON bodyKind = iota
	bodyCSV
	bodyProto
	bodyUnsupported
)

// protoRequestType is the value of a protobuf Content-Type's proto= (or
// messageType=) parameter that marks the body as a whole
// AnalyzeCaptureRequest; without it the body is a Capture.
const protoRequestType = "kinchain.v1.AnalyzeCaptureRequest"

// isProtoType reports whether a media type names binary protobuf.
func isProtoType(mt string) bool {
	switch mt {
	case "application/x-protobuf", "application/protobuf", "application/vnd.google.protobuf", "application/x-protobuffer":
		return true
	}
	return false
}

// classify decides the body kind: binary protobuf for the protobuf media
// types (isProtoType), otherwise as internal/httpbody decides for every
// route taking a capture (CSV or JSON by Content-Type, sniffing the first
// non-space byte when the type says nothing useful: '{' is JSON, anything
// else CSV).
func classify(r *http.Request) (bodyKind, *http.Request) {
	if mt, _, err := mime.ParseMediaType(r.Header.Get("Content-Type")); err == nil && isProtoType(mt) {
		return bodyProto, r
	}
	k, r := httpbody.Classify(r)
	switch k {
	case httpbody.CSV:
		return bodyCSV, r
	case httpbody.JSON:
		return bodyJSON, r
	}
	return bodyUnsupported, r
}

// analyzeHTTP serves POST and PUT /v1/captures:analyze: protojson bodies
// go to the gateway (a bare Capture is wrapped into a request first), CSV
// bodies to Analyzer.AnalyzeCSV with options from the query, binary
// protobuf bodies to analyzeProto.
func (s *Server) analyzeHTTP(w http.ResponseWriter, r *http.Request) {
	kind, r := classify(r)
	switch kind {
	case bodyCSV:
		s.analyzeCSV(w, r)
	case bodyProto:
		s.analyzeProto(w, r)
	case bodyJSON:
		if len(r.URL.RawQuery) > 0 {
			s.WriteHTTPError(w, r, fieldViolation("query", "QUERY_WITH_JSON",
				"query parameters apply to CSV and protobuf Capture bodies only; put options in the JSON body's \"options\""))
			return
		}
		b, err := io.ReadAll(r.Body)
		if err != nil {
			s.WriteHTTPError(w, r, s.bodyReadError(r, err))
			return
		}
		if bareCapture(b) {
			// {"capture": …} on the same line keeps decode's line numbers.
			wrapped := make([]byte, 0, len(b)+12)
			wrapped = append(append(append(wrapped, `{"capture":`...), b...), '}')
			b = wrapped
		}
		jb := &jsonBody{b: b, r: bytes.NewReader(b)}
		r = r.Clone(context.WithValue(r.Context(), jsonBodyKey{}, jb))
		r.Body = jb
		r.ContentLength = int64(len(b))
		if r.Method != http.MethodPost {
			r.Method = http.MethodPost
		}
		if r.Header.Get("Content-Type") == "" || !strings.Contains(r.Header.Get("Content-Type"), "json") {
			r.Header.Set("Content-Type", "application/json")
		}
		s.gw.ServeHTTP(w, r)
	default:
		s.WriteHTTPError(w, r, &runtime.HTTPStatusError{
			HTTPStatus: http.StatusUnsupportedMediaType,
			Err: fieldViolation("Content-Type", "UNSUPPORTED_MEDIA_TYPE",
				"%q is not accepted; send application/json (AnalyzeCaptureRequest or Capture), text/csv (a capture) or application/x-protobuf (a Capture, or with proto=%s a request)", r.Header.Get("Content-Type"), protoRequestType),
		})
	}
}

// analyzeCSV analyses a CSV capture body.
func (s *Server) analyzeCSV(w http.ResponseWriter, r *http.Request) {
	opts, err := QueryOptions(r.URL.Query())
	if err != nil {
		s.WriteHTTPError(w, r, err)
		return
	}
	ctx := r.Context()
	resp, err := s.analyzer.AnalyzeCSV(ctx, r.Body, opts)
	if err != nil {
		s.WriteHTTPError(w, r, s.toStatus(ctx, err, scopeCSV))
		return
	}
	s.metrics.observeResponse(resp)
	b, err := gatewayMarshaler.Marshal(resp)
	if err != nil {
		s.WriteHTTPError(w, r, s.toStatus(ctx, err, scopeCSV))
		return
	}
	w.Header().Set("Content-Type", "application/json")
	w.WriteHeader(http.StatusOK)
	_, _ = w.Write(b)
}

// bodyReadError is the error for a body that could not be read: 413
// past the limit (gatewayError sees the overflow), else 400 naming body.
func (s *Server) bodyReadError(r *http.Request, err error) error {
	if ctxErr := r.Context().Err(); ctxErr != nil {
		return s.toStatus(r.Context(), ctxErr, scopeBody)
	}
	return fieldViolation("body", "UNREADABLE_BODY", "reading the request body: %v", err)
}

// analyzeProto analyses a binary protobuf body: a Capture with options from
// the query, or, when the Content-Type says proto=kinchain.v1.AnalyzeCaptureRequest
// (or messageType=…), a whole request. Both are read by decode's hardened
// protobuf reader (decodeAnalyzeRequest), so errors name the field
// (capture.tracks[0].qz[11]) as over gRPC. The answer is protojson, or
// binary protobuf when the Accept header asks for a protobuf type.
func (s *Server) analyzeProto(w http.ResponseWriter, r *http.Request) {
	ctx := r.Context()
	_, params, _ := mime.ParseMediaType(r.Header.Get("Content-Type"))
	whole := params["proto"] == protoRequestType || params["messagetype"] == protoRequestType
	var opts *kinchainv1.AnalysisOptions
	if whole {
		if len(r.URL.RawQuery) > 0 {
			s.WriteHTTPError(w, r, fieldViolation("query", "QUERY_WITH_REQUEST",
				"query parameters apply to Capture bodies only; put options in the request's options field"))
			return
		}
	} else {
		var err error
		if opts, err = QueryOptions(r.URL.Query()); err != nil {
			s.WriteHTTPError(w, r, err)
			return
		}
	}
	b, err := io.ReadAll(r.Body)
	if err != nil {
		s.WriteHTTPError(w, r, s.bodyReadError(r, err))
		return
	}
	var req *kinchainv1.AnalyzeCaptureRequest
	if whole {
		req, err = decodeAnalyzeRequest(b, s.lim)
	} else {
		var pc *kinchainv1.Capture
		if pc, err = decodeCapturePB(b, s.lim); err == nil {
			req = &kinchainv1.AnalyzeCaptureRequest{Capture: pc, Options: opts}
		}
	}
	b = nil
	if err != nil {
		s.WriteHTTPError(w, r, s.toStatus(ctx, err, scopeBody))
		return
	}
	resp, err := s.svc.AnalyzeCapture(ctx, req)
	releaseRequest(req) // the analysis is done with the arrays (pool.go)
	if err != nil {
		s.WriteHTTPError(w, r, err)
		return
	}
	var out []byte
	ct := "application/json"
	if accept := r.Header.Get("Accept"); acceptsProto(accept) {
		ct = "application/x-protobuf"
		out, err = proto.Marshal(resp)
	} else {
		out, err = gatewayMarshaler.Marshal(resp)
	}
	if err != nil {
		s.WriteHTTPError(w, r, s.toStatus(ctx, err, scopeBody))
		return
	}
	w.Header().Set("Content-Type", ct)
	w.WriteHeader(http.StatusOK)
	_, _ = w.Write(out)
}

// acceptsProto reports whether an Accept header lists a protobuf type.
func acceptsProto(accept string) bool {
	for _, part := range strings.Split(accept, ",") {
		if mt, _, err := mime.ParseMediaType(strings.TrimSpace(part)); err == nil && isProtoType(mt) {
			return true
		}
	}
	return false
}

// WriteHTTPError writes err as the gateway does: a google.rpc.Status in
// JSON (field violations included) with the HTTP status of its code — 400
// for INVALID_ARGUMENT, 413 when the body exceeded the limit, 429 for
// RESOURCE_EXHAUSTED, 500 for INTERNAL. Errors that are not gRPC status
// errors are mapped like engine errors first. For handlers added with
// HandleHTTP.
func (s *Server) WriteHTTPError(w http.ResponseWriter, r *http.Request, err error) {
	var hs *runtime.HTTPStatusError
	if _, ok := err.(interface{ GRPCStatus() *status.Status }); !ok && !errors.As(err, &hs) {
		err = s.toStatus(r.Context(), err, scopeRequest)
	}
	runtime.HTTPError(r.Context(), s.gw, gatewayMarshaler, w, r, err)
}

// gatewayError is the gateway's error handler: 413 for an oversized body,
// a BadRequest detail for body decoding errors (which the generated code
// reports as bare INVALID_ARGUMENT), and Retry-After on 429 and 503.
func (s *Server) gatewayError(ctx context.Context, mux *runtime.ServeMux, m runtime.Marshaler, w http.ResponseWriter, r *http.Request, err error) {
	if lb := limitedBodyFrom(r.Context()); lb != nil && lb.overflow.Load() {
		s.metrics.rejected.WithLabelValues(limitBody).Inc()
		err = &runtime.HTTPStatusError{HTTPStatus: http.StatusRequestEntityTooLarge,
			Err: fieldViolation("body", "BODY_TOO_LARGE", "the request body exceeds the server's limit of %d bytes", lb.limit)}
	}
	var hs *runtime.HTTPStatusError
	inner := err
	if errors.As(err, &hs) {
		inner = hs.Err
	}
	st := status.Convert(inner)
	if jb, _ := ctx.Value(jsonBodyKey{}).(*jsonBody); jb != nil && jb.err != nil && st.Code() == codes.InvalidArgument && len(st.Details()) == 0 {
		// The body did not decode: answer with decode's field violation.
		derr := jb.err
		jb.err = nil
		if len(validationErrors(derr)) > 0 {
			inner = s.toStatus(ctx, derr, scopeBody)
			err, st = inner, status.Convert(inner)
		}
	}
	if st.Code() == codes.InvalidArgument && len(st.Details()) == 0 {
		inner = withDetails(codes.InvalidArgument, st.Message(), &errdetails.BadRequest{
			FieldViolations: []*errdetails.BadRequest_FieldViolation{{Field: "body", Description: st.Message(), Reason: "MALFORMED_BODY"}},
		})
		if hs != nil {
			err = &runtime.HTTPStatusError{HTTPStatus: hs.HTTPStatus, Err: inner}
		} else {
			err = inner
		}
	}
	switch st.Code() {
	case codes.ResourceExhausted, codes.Unavailable:
		retry := retryAfter
		for _, d := range st.Details() {
			if ri, ok := d.(*errdetails.RetryInfo); ok && ri.GetRetryDelay().AsDuration() > retry {
				retry = ri.GetRetryDelay().AsDuration()
			}
		}
		w.Header().Set("Retry-After", strconv.Itoa(int((retry+time.Second-1)/time.Second)))
	case codes.Unauthenticated:
		// The gateway puts the status message in WWW-Authenticate; the
		// challenge of RFC 6750 §3 goes there instead.
		w = challengeWriter{w}
	}
	runtime.DefaultHTTPErrorHandler(ctx, mux, m, w, r, err)
}

// challengeWriter sets the bearer challenge as the header is written.
type challengeWriter struct{ http.ResponseWriter }

func (c challengeWriter) WriteHeader(code int) {
	c.Header().Set("WWW-Authenticate", `Bearer realm="kinchain"`)
	c.ResponseWriter.WriteHeader(code)
}

func writeJSON(w http.ResponseWriter, code int, body string) {
	w.Header().Set("Content-Type", "application/json")
	w.WriteHeader(code)
	_, _ = io.WriteString(w, body+"\n")
}

// limitedBody wraps a request body with http.MaxBytesReader, counting the
// bytes read and remembering whether the limit was hit (so the error
// handler answers 413 whatever error the decoder made of it).
type limitedBody struct {
	rc       io.ReadCloser
	limit    int64
	n        atomic.Int64
	overflow atomic.Bool
}

func (b *limitedBody) Read(p []byte) (int, error) {
	n, err := b.rc.Read(p)
	b.n.Add(int64(n))
	var mbe *http.MaxBytesError
	if err != nil && errors.As(err, &mbe) {
		b.overflow.Store(true)
	}
	return n, err
}

func (b *limitedBody) Close() error { return b.rc.Close() }

type limitedBodyKey struct{}

func limitedBodyFrom(ctx context.Context) *limitedBody {
	lb, _ := ctx.Value(limitedBodyKey{}).(*limitedBody)
	return lb
}

// statusRecorder records the status code written.
type statusRecorder struct {
	http.ResponseWriter
	code int
}

func (r *statusRecorder) WriteHeader(code int) {
	if r.code == 0 {
		r.code = code
	}
	r.ResponseWriter.WriteHeader(code)
}

func (r *statusRecorder) Write(b []byte) (int, error) {
	if r.code == 0 {
		r.code = http.StatusOK
	}
	return r.ResponseWriter.Write(b)
}

// Unwrap lets http.ResponseController reach the connection.
func (r *statusRecorder) Unwrap() http.ResponseWriter { return r.ResponseWriter }

// route wraps an HTTP handler with the server's middleware: request id
// (X-Request-Id taken or generated, echoed), bearer token and rate limit
// when tokens are configured (all routes but the probes; 401 / 429), body
// limit (413), panic recovery (500, counted), metrics and one log line per
// request. limited routes also take a concurrent-requests slot (429 when
// none is free), get the default deadline, a read deadline for the body at
// that deadline and a write deadline for the answer RequestTimeout later.
func (s *Server) route(route string, limited bool, h http.Handler) http.Handler {
	return http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		start := time.Now()
		id := acceptRequestID(r.Header.Get(requestIDKey))
		w.Header().Set(requestIDKey, id)
		ctx := withRequestID(r.Context(), id)
		rec := &statusRecorder{ResponseWriter: w}
		lb := &limitedBody{rc: http.MaxBytesReader(w, r.Body, int64(s.cfg.MaxRecvMsgBytes)), limit: int64(s.cfg.MaxRecvMsgBytes)}
		ctx = context.WithValue(ctx, limitedBodyKey{}, lb)
		r = r.WithContext(ctx)
		r.Body = lb
		s.metrics.inFlight.WithLabelValues(transportHTTP).Inc()
		principal := ""

		defer func() {
			if p := recover(); p != nil {
				if p == http.ErrAbortHandler {
					panic(p)
				}
				err := s.recovered(ctx, p)
				if rec.code == 0 {
					s.WriteHTTPError(rec, r, err)
				}
			}
			s.metrics.inFlight.WithLabelValues(transportHTTP).Dec()
			code := rec.code
			if code == 0 {
				code = http.StatusOK
			}
			d := time.Since(start)
			s.metrics.httpRequests.WithLabelValues(route, httpCode(code)).Inc()
			s.metrics.httpDuration.WithLabelValues(route).Observe(d.Seconds())
			s.metrics.httpBodyBytes.WithLabelValues(route).Observe(float64(lb.n.Load()))
			lvl := slog.LevelInfo
			switch {
			case code >= 500:
				lvl = slog.LevelError
			case code == http.StatusTooManyRequests || code == http.StatusRequestEntityTooLarge:
				lvl = slog.LevelWarn
			}
			if route == routeHealthz || route == routeReadyz {
				lvl = slog.LevelDebug // probes every few seconds would drown the log
			}
			attrs := []slog.Attr{slog.String("request_id", id)}
			if principal != "" {
				attrs = append(attrs, slog.String("auth.token", principal))
			}
			s.log.LogAttrs(ctx, lvl, "finished http request", append(attrs,
				slog.String("http.method", r.Method),
				slog.String("http.route", route),
				slog.Int("http.status", code),
				slog.Int64("http.request_bytes", lb.n.Load()),
				slog.String("peer.address", r.RemoteAddr),
				slog.Float64("duration_ms", float64(d.Microseconds())/1000))...)
		}()

		if s.tokens != nil && route != routeHealthz && route != routeReadyz {
			actx, err := s.authorize(ctx, transportHTTP, r.Header.Get("Authorization"))
			if err != nil {
				s.WriteHTTPError(rec, r, err)
				return
			}
			ctx = actx
			principal = principalFrom(ctx)
			r = r.WithContext(ctx)
		}
		if r.ContentLength > int64(s.cfg.MaxRecvMsgBytes) {
			s.metrics.rejected.WithLabelValues(limitBody).Inc()
			s.WriteHTTPError(rec, r, &runtime.HTTPStatusError{HTTPStatus: http.StatusRequestEntityTooLarge,
				Err: fieldViolation("body", "BODY_TOO_LARGE", "the request body (%d bytes) exceeds the server's limit of %d bytes", r.ContentLength, s.cfg.MaxRecvMsgBytes)})
			return
		}
		if limited {
			if !tryAcquire(s.limits.requests) {
				s.WriteHTTPError(rec, r, s.busyRequests())
				return
			}
			defer func() { <-s.limits.requests }()
			if _, ok := ctx.Deadline(); !ok {
				var cancel context.CancelFunc
				ctx, cancel = context.WithTimeout(ctx, s.cfg.RequestTimeout)
				defer cancel()
				r = r.WithContext(ctx)
			}
			dl, _ := ctx.Deadline()
			rc := http.NewResponseController(rec)
			_ = rc.SetReadDeadline(dl)
			// A client that does not read the answer cannot hold the slot
			// and the handler past the deadline plus as long again.
			_ = rc.SetWriteDeadline(dl.Add(s.cfg.RequestTimeout))
		}
		h.ServeHTTP(rec, r)
	})
}
