package plot

import (
	"bytes"
	"context"
	"encoding/json"
	"errors"
	"image/png"
	"io"
	"net/http"
	"net/http/httptest"
	"net/url"
	"strings"
	"sync"
	"testing"

	"github.com/grpc-ecosystem/grpc-gateway/v2/runtime"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"
	"google.golang.org/protobuf/encoding/protojson"
	"google.golang.org/protobuf/proto"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/validate"
)

// fakeAnalyzer records what it was asked and answers with the fixture (or
// err).
type fakeAnalyzer struct {
	mu   sync.Mutex
	req  *kinchainv1.AnalyzeCaptureRequest
	csv  string
	opts *kinchainv1.AnalysisOptions
	resp *kinchainv1.AnalyzeCaptureResponse
	err  error
}

func (f *fakeAnalyzer) Analyze(_ context.Context, req *kinchainv1.AnalyzeCaptureRequest) (*kinchainv1.AnalyzeCaptureResponse, error) {
	f.mu.Lock()
	defer f.mu.Unlock()
	f.req = req
	return f.answer()
}

func (f *fakeAnalyzer) AnalyzeCSV(_ context.Context, r io.Reader, opts *kinchainv1.AnalysisOptions) (*kinchainv1.AnalyzeCaptureResponse, error) {
	b, err := io.ReadAll(r)
	if err != nil {
		return nil, err // as the CSV decoder does: the read error comes back
	}
	f.mu.Lock()
	defer f.mu.Unlock()
	f.csv, f.opts = string(b), opts
	return f.answer()
}

func (f *fakeAnalyzer) answer() (*kinchainv1.AnalyzeCaptureResponse, error) {
	if f.err != nil {
		return nil, f.err
	}
	if f.resp != nil {
		return f.resp, nil
	}
	return fixture(), nil
}

// rpcStatus is the JSON of a google.rpc.Status with BadRequest details.
type rpcStatus struct {
	Code    int    `json:"code"`
	Message string `json:"message"`
	Details []struct {
		Type            string `json:"@type"`
		FieldViolations []struct {
			Field, Description, Reason string
		} `json:"field_violations"`
	} `json:"details"`
}

func (s rpcStatus) fields() []string {
	var out []string
	for _, d := range s.Details {
		for _, v := range d.FieldViolations {
			out = append(out, v.Field)
		}
	}
	return out
}

const jsonBody = `{"capture":{"captureId":"x","tracks":[{"segment":"SEGMENT_PELVIS","timeS":[0,0.01]}]},"options":{"cutoffHz":15}}`

func do(t *testing.T, h http.Handler, method, target, contentType, accept, body string) *httptest.ResponseRecorder {
	t.Helper()
	r := httptest.NewRequest(method, target, strings.NewReader(body))
	if contentType != "" {
		r.Header.Set("Content-Type", contentType)
	}
	if accept != "" {
		r.Header.Set("Accept", accept)
	}
	w := httptest.NewRecorder()
	h.ServeHTTP(w, r)
	return w
}

func TestHandlerJSON(t *testing.T) {
	fa := &fakeAnalyzer{}
	h := Handler(fa, HandlerConfig{})
	w := do(t, h, "POST", "/v1/captures:plot", "application/json", "image/svg+xml", jsonBody)
	if w.Code != 200 {
		t.Fatalf("status %d: %s", w.Code, w.Body)
	}
	if ct := w.Header().Get("Content-Type"); ct != "image/svg+xml" {
		t.Errorf("Content-Type %q", ct)
	}
	if v := w.Header().Get("Vary"); v != "Accept" {
		t.Errorf("Vary %q", v)
	}
	d := parseSVG(t, w.Body.Bytes())
	if got := longPaths(d, 50); len(got) != 5 {
		t.Errorf("curves %v", got)
	}
	// The body reached the analyzer, with the series forced on and the
	// other options kept.
	want := &kinchainv1.AnalyzeCaptureRequest{}
	if err := protojson.Unmarshal([]byte(jsonBody), want); err != nil {
		t.Fatal(err)
	}
	want.Options.IncludeSeries = true
	if !proto.Equal(fa.req, want) {
		t.Errorf("analyzer got %v, want %v", fa.req, want)
	}
	// Same for a body without options.
	do(t, h, "POST", "/v1/captures:plot", "", "", `{"capture":{"captureId":"y"}}`)
	if !fa.req.GetOptions().GetIncludeSeries() {
		t.Error("include_series not forced on for a body without options")
	}
}

func TestHandlerCSVAndPNG(t *testing.T) {
	fa := &fakeAnalyzer{}
	h := Handler(fa, HandlerConfig{})
	csv := "# capture_id: c\nsegment,time_s,qw,qx,qy,qz\n"
	w := do(t, h, "POST", "/v1/captures:plot?cutoff_hz=12&speed=SPEED_DEFINITION_VERTICAL&neutral.start_s=0.1&neutral.endS=0.6&filterOrder=4&swing=0&width=600",
		"text/csv; charset=utf-8", "image/png", csv)
	if w.Code != 200 {
		t.Fatalf("status %d: %s", w.Code, w.Body)
	}
	if ct := w.Header().Get("Content-Type"); ct != "image/png" {
		t.Errorf("Content-Type %q", ct)
	}
	img, err := png.Decode(bytes.NewReader(w.Body.Bytes()))
	if err != nil {
		t.Fatal(err)
	}
	if img.Bounds().Dx() != 600 {
		t.Errorf("width %d, want 600", img.Bounds().Dx())
	}
	if fa.csv != csv {
		t.Errorf("analyzer got CSV %q", fa.csv)
	}
	cut := 12.0
	want := &kinchainv1.AnalysisOptions{
		CutoffHz: &cut, Speed: kinchainv1.SpeedDefinition_SPEED_DEFINITION_VERTICAL, FilterOrder: 4,
		Neutral: &kinchainv1.TimeWindow{StartS: 0.1, EndS: 0.6}, IncludeSeries: true,
	}
	if !proto.Equal(fa.opts, want) {
		t.Errorf("options %v, want %v", fa.opts, want)
	}
}

func TestNegotiate(t *testing.T) {
	cases := []struct {
		accept []string
		want   Format
		ok     bool
	}{
		{nil, FormatSVG, true},
		{[]string{"image/svg+xml"}, FormatSVG, true},
		{[]string{"image/png"}, FormatPNG, true},
		{[]string{"*/*"}, FormatSVG, true},
		{[]string{"image/*"}, FormatSVG, true},
		{[]string{"text/html, image/png;q=0.8, */*;q=0.1"}, FormatPNG, true},
		{[]string{"image/png;q=0.5, image/svg+xml"}, FormatSVG, true},
		{[]string{"image/svg+xml;q=0", "image/png"}, FormatPNG, true},
		{[]string{"text/html"}, "", false},
		{[]string{"application/json"}, "", false},
		{[]string{"image/png;q=0"}, "", false},
		{[]string{"image/png;q=2"}, "", false},
	}
	for _, c := range cases {
		got, ok := negotiate(c.accept)
		if got != c.want || ok != c.ok {
			t.Errorf("negotiate(%q) = %q, %v; want %q, %v", c.accept, got, ok, c.want, c.ok)
		}
	}
}

func TestHandlerErrors(t *testing.T) {
	noSwings := fixture()
	noSwings.Swings = nil
	cases := []struct {
		name        string
		method      string
		target      string
		contentType string
		accept      string
		body        string
		analyzer    *fakeAnalyzer
		cfg         HandlerConfig
		code        int
		field       string
	}{
		{"GET", "GET", "/v1/captures:plot", "", "", "", nil, HandlerConfig{}, 405, ""},
		{"unsupported Accept", "POST", "/v1/captures:plot", "application/json", "text/html", jsonBody, nil, HandlerConfig{}, 406, "Accept"},
		{"unsupported body", "POST", "/v1/captures:plot", "application/xml", "", "<x/>", nil, HandlerConfig{}, 415, "Content-Type"},
		{"malformed JSON", "POST", "/v1/captures:plot", "application/json", "", `{"capture":`, nil, HandlerConfig{}, 400, "body"},
		{"unknown JSON field", "POST", "/v1/captures:plot", "application/json", "", `{"captur":{}}`, nil, HandlerConfig{}, 400, "body"},
		{"option in query with JSON", "POST", "/v1/captures:plot?cutoff_hz=3", "application/json", "", jsonBody, nil, HandlerConfig{}, 400, "cutoff_hz"},
		{"unknown CSV query parameter", "POST", "/v1/captures:plot?cutof_hz=3", "text/csv", "", "x", nil, HandlerConfig{}, 400, "cutof_hz"},
		{"bad option value", "POST", "/v1/captures:plot?cutoff_hz=fast", "text/csv", "", "x", nil, HandlerConfig{}, 400, "cutoff_hz"},
		{"bad enum", "POST", "/v1/captures:plot?speed=SIDEWAYS", "text/csv", "", "x", nil, HandlerConfig{}, 400, "speed"},
		{"same option twice", "POST", "/v1/captures:plot?cutoff_hz=3&cutoffHz=4", "text/csv", "", "x", nil, HandlerConfig{}, 400, "cutoff_hz"},
		{"repeated parameter", "POST", "/v1/captures:plot?rate_hz=3&rate_hz=4", "text/csv", "", "x", nil, HandlerConfig{}, 400, "rate_hz"},
		{"message as value", "POST", "/v1/captures:plot?neutral=1", "text/csv", "", "x", nil, HandlerConfig{}, 400, "neutral"},
		{"swing out of range", "POST", "/v1/captures:plot?swing=3", "application/json", "", jsonBody, nil, HandlerConfig{}, 400, "swing"},
		{"swing not a number", "POST", "/v1/captures:plot?swing=first", "application/json", "", jsonBody, nil, HandlerConfig{}, 400, "swing"},
		{"width too small", "POST", "/v1/captures:plot?width=10", "application/json", "", jsonBody, nil, HandlerConfig{}, 400, "width"},
		{"from without to", "POST", "/v1/captures:plot?from_ms=-100", "application/json", "", jsonBody, nil, HandlerConfig{}, 400, "from_ms"},
		{"bad segments", "POST", "/v1/captures:plot?segments=pelvis,tail", "application/json", "", jsonBody, nil, HandlerConfig{}, 400, "segments"},
		{"bad embed_fonts", "POST", "/v1/captures:plot?embed_fonts=maybe", "application/json", "", jsonBody, nil, HandlerConfig{}, 400, "embed_fonts"},
		{"no swings", "POST", "/v1/captures:plot", "application/json", "", jsonBody, &fakeAnalyzer{resp: noSwings}, HandlerConfig{}, 400, "swings"},
		{"validation error", "POST", "/v1/captures:plot", "application/json", "", jsonBody,
			&fakeAnalyzer{err: errors.Join(
				&validate.Error{Field: "tracks[2].time_s", Sample: 118, Reason: validate.ReasonTimeOrder, Detail: "not after the previous sample"},
				&validate.Error{Field: "tracks[0].qw", Sample: -1, Reason: validate.ReasonMissingField, Detail: "required"})},
			HandlerConfig{}, 400, "tracks[2].time_s[118]"},
		{"CSV validation error", "POST", "/v1/captures:plot", "text/csv", "", "bad",
			&fakeAnalyzer{err: &validate.Error{Field: "segment", Sample: -1, Line: 3, Reason: validate.ReasonUnknownSegment, Detail: `"tail" is not a segment`}},
			HandlerConfig{}, 400, "segment"},
		{"internal error", "POST", "/v1/captures:plot", "application/json", "", jsonBody, &fakeAnalyzer{err: errors.New("disk on fire")}, HandlerConfig{}, 500, ""},
		{"deadline", "POST", "/v1/captures:plot", "application/json", "", jsonBody, &fakeAnalyzer{err: context.DeadlineExceeded}, HandlerConfig{}, 504, ""},
		{"JSON body too large", "POST", "/v1/captures:plot", "application/json", "", jsonBody, nil, HandlerConfig{MaxBodyBytes: 20}, 413, "body"},
		{"CSV body too large", "POST", "/v1/captures:plot", "text/csv", "", strings.Repeat("x", 100), nil, HandlerConfig{MaxBodyBytes: 20}, 413, "body"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			fa := c.analyzer
			if fa == nil {
				fa = &fakeAnalyzer{}
			}
			w := do(t, Handler(fa, c.cfg), c.method, c.target, c.contentType, c.accept, c.body)
			if w.Code != c.code {
				t.Fatalf("status %d, want %d: %s", w.Code, c.code, w.Body)
			}
			if ct := w.Header().Get("Content-Type"); ct != "application/json" {
				t.Errorf("Content-Type %q", ct)
			}
			var st rpcStatus
			if err := json.Unmarshal(w.Body.Bytes(), &st); err != nil {
				t.Fatalf("body is not JSON: %v: %s", err, w.Body)
			}
			if st.Code == 0 || st.Message == "" {
				t.Errorf("status without code or message: %s", w.Body)
			}
			if c.field != "" {
				fs := st.fields()
				if len(fs) == 0 || fs[0] != c.field {
					t.Errorf("field violations %v, want %q first: %s", fs, c.field, w.Body)
				}
				if !strings.HasPrefix(st.Message, c.field) {
					t.Errorf("message %q does not name %q", st.Message, c.field)
				}
			}
			if c.code == 500 && strings.Contains(w.Body.String(), "disk on fire") {
				t.Error("internal error text leaked to the client")
			}
		})
	}
}

// TestHandlerHooks: the server's own option parser and error writer are
// used when given.
func TestHandlerHooks(t *testing.T) {
	var gotErr error
	var gotQuery url.Values
	h := Handler(&fakeAnalyzer{}, HandlerConfig{
		QueryOptions: func(q url.Values) (*kinchainv1.AnalysisOptions, error) {
			gotQuery = q
			return nil, violation(codes.InvalidArgument, "speed", "INVALID_VALUE", "hooked")
		},
		WriteError: func(w http.ResponseWriter, _ *http.Request, err error) {
			gotErr = err
			w.WriteHeader(418)
		},
	})
	w := do(t, h, "POST", "/v1/captures:plot?speed=vertical&swing=0&width=900", "text/csv", "", "x")
	if w.Code != 418 || status.Code(gotErr) != codes.InvalidArgument {
		t.Errorf("status %d, error %v", w.Code, gotErr)
	}
	if len(gotQuery) != 1 || gotQuery.Get("speed") != "vertical" {
		t.Errorf("QueryOptions got %v, want only the analysis parameter", gotQuery)
	}
	// Statuses without a gRPC code arrive as *runtime.HTTPStatusError.
	do(t, h, "POST", "/v1/captures:plot", "text/csv", "text/html", "x")
	var hs *runtime.HTTPStatusError
	if !errors.As(gotErr, &hs) || hs.HTTPStatus != http.StatusNotAcceptable {
		t.Errorf("406 reported as %v", gotErr)
	}
}

func TestParseSegments(t *testing.T) {
	got, err := ParseSegments("pelvis, thorax,lead_upper_arm,SEGMENT_CLUB,lead-hand")
	if err != nil {
		t.Fatal(err)
	}
	want := []kinchainv1.Segment{1, 2, 4, 10, 6}
	if len(got) != len(want) {
		t.Fatalf("got %v", got)
	}
	for i := range want {
		if got[i] != want[i] {
			t.Errorf("[%d] = %v, want %v", i, got[i], want[i])
		}
	}
	for _, bad := range []string{"", ",", "unspecified", "tail"} {
		if _, err := ParseSegments(bad); err == nil {
			t.Errorf("ParseSegments(%q) accepted", bad)
		}
	}
}
