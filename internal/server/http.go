package server

import (
	"bufio"
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
// path for sample arrays (see fastjson.go and NOTES-server.md).
type protoJSON struct{ runtime.JSONPb }

// NewDecoder returns a decoder that reads r to the end and unmarshals it;
// an empty body is io.EOF (an empty request, as the gateway expects).
func (m *protoJSON) NewDecoder(r io.Reader) runtime.Decoder {
	return runtime.DecoderFunc(func(v any) error {
		b, err := io.ReadAll(r)
		if err != nil {
			return err
		}
		if len(bytes.TrimSpace(b)) == 0 {
			return io.EOF
		}
		if req, ok := v.(*kinchainv1.AnalyzeCaptureRequest); ok {
			return decodeRequestJSON(b, m.UnmarshalOptions, req)
		}
		pm, ok := v.(proto.Message)
		if !ok {
			return m.JSONPb.Unmarshal(b, v)
		}
		return m.UnmarshalOptions.Unmarshal(b, pm)
	})
}

// newHTTPHandler builds the HTTP listener's mux: the gateway (registered
// in-process, see NOTES-server.md for the measurement behind that choice),
// CSV uploads on the same path, the OpenAPI document and the probes.
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
	s.handle(http.MethodGet, routeHealthz, false, http.HandlerFunc(func(w http.ResponseWriter, _ *http.Request) {
		writeJSON(w, http.StatusOK, `{"status":"alive"}`)
	}))
	s.handle(http.MethodGet, routeReadyz, false, http.HandlerFunc(func(w http.ResponseWriter, _ *http.Request) {
		if s.ready.Load() {
			writeJSON(w, http.StatusOK, `{"status":"ready"}`)
			return
		}
		writeJSON(w, http.StatusServiceUnavailable, `{"status":"not ready"}`)
	}))
	s.httpMux.Handle("/", s.route(routeOther, false, http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		s.WriteHTTPError(w, r, status.Errorf(codes.NotFound, "no route for %s %s", r.Method, r.URL.Path))
	})))
	return nil
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
	bodyUnsupported
)

// classify decides the body kind from Content-Type, sniffing the first
// non-space byte ('{' is JSON, anything else CSV) when the type says
// nothing useful (none, application/octet-stream as curl -T sends it,
// application/x-www-form-urlencoded as curl -d sends it, text/plain).
func classify(r *http.Request) (bodyKind, *http.Request) {
	ct := r.Header.Get("Content-Type")
	mt := ""
	if ct != "" {
		if m, _, err := mime.ParseMediaType(ct); err == nil {
			mt = m
		} else {
			return bodyUnsupported, r
		}
	}
	switch {
	case mt == "text/csv" || mt == "application/csv":
		return bodyCSV, r
	case mt == "application/json" || strings.HasSuffix(mt, "+json"):
		return bodyJSON, r
	case mt == "" || mt == "application/octet-stream" || mt == "application/x-www-form-urlencoded" || mt == "text/plain":
		br := bufio.NewReaderSize(r.Body, 512)
		r2 := r.Clone(r.Context())
		r2.Body = struct {
			io.Reader
			io.Closer
		}{br, r.Body}
		kind := bodyCSV
		b, _ := br.Peek(512) // fewer bytes at EOF; errors surface on reading
		if t := strings.TrimLeft(string(b), " \t\r\n"); strings.HasPrefix(t, "{") {
			kind = bodyJSON
		}
		return kind, r2
	}
	return bodyUnsupported, r
}

// analyzeHTTP serves POST and PUT /v1/captures:analyze: protojson bodies
// go to the gateway, CSV bodies to Analyzer.AnalyzeCSV with options from the
// query.
func (s *Server) analyzeHTTP(w http.ResponseWriter, r *http.Request) {
	kind, r := classify(r)
	switch kind {
	case bodyCSV:
		s.analyzeCSV(w, r)
	case bodyJSON:
		if len(r.URL.RawQuery) > 0 {
			s.WriteHTTPError(w, r, fieldViolation("query", "QUERY_WITH_JSON",
				"query parameters apply to CSV bodies only; put options in the JSON body's \"options\""))
			return
		}
		if r.Method != http.MethodPost {
			r = r.Clone(r.Context())
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
				"%q is not accepted; send application/json (AnalyzeCaptureRequest) or text/csv (a capture)", r.Header.Get("Content-Type")),
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
		w.Header().Set("Retry-After", strconv.Itoa(int(retryAfter/time.Second)))
	}
	runtime.DefaultHTTPErrorHandler(ctx, mux, m, w, r, err)
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
// (X-Request-Id taken or generated, echoed), body limit (413), panic
// recovery (500, counted), metrics and one log line per request. limited
// routes also take a concurrent-requests slot (429 when none is free), get
// the default deadline and a read deadline for the body.
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
			s.log.LogAttrs(ctx, lvl, "finished http request",
				slog.String("request_id", id),
				slog.String("http.method", r.Method),
				slog.String("http.route", route),
				slog.Int("http.status", code),
				slog.Int64("http.request_bytes", lb.n.Load()),
				slog.String("peer.address", r.RemoteAddr),
				slog.Float64("duration_ms", float64(d.Microseconds())/1000))
		}()

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
			_ = http.NewResponseController(rec).SetReadDeadline(dl)
		}
		h.ServeHTTP(rec, r)
	})
}
