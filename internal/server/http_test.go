package server_test

import (
	"bytes"
	"context"
	"encoding/json"
	"io"
	"net/http"
	"strings"
	"testing"

	"google.golang.org/protobuf/encoding/protojson"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/api/openapi"
)

// httpDo sends a request like curl would and returns status, headers and
// body.
func httpDo(t *testing.T, method, url, contentType string, body io.Reader) (int, http.Header, []byte) {
	t.Helper()
	req, err := http.NewRequest(method, url, body)
	if err != nil {
		t.Fatal(err)
	}
	if contentType != "" {
		req.Header.Set("Content-Type", contentType)
	}
	resp, err := http.DefaultClient.Do(req)
	if err != nil {
		t.Fatal(err)
	}
	defer resp.Body.Close()
	b, err := io.ReadAll(resp.Body)
	if err != nil {
		t.Fatal(err)
	}
	return resp.StatusCode, resp.Header, b
}

// rpcStatus is google.rpc.Status as the gateway writes it.
type rpcStatus struct {
	Code    int    `json:"code"`
	Message string `json:"message"`
	Details []struct {
		Type            string `json:"@type"`
		FieldViolations []struct {
			Field       string `json:"field"`
			Description string `json:"description"`
			Reason      string `json:"reason"`
		} `json:"field_violations"`
	} `json:"details"`
}

func decodeStatus(t *testing.T, b []byte) rpcStatus {
	t.Helper()
	var s rpcStatus
	if err := json.Unmarshal(b, &s); err != nil {
		t.Fatalf("error body is not a JSON status: %v\n%s", err, b)
	}
	return s
}

func (s rpcStatus) firstField() string {
	for _, d := range s.Details {
		if strings.HasSuffix(d.Type, "google.rpc.BadRequest") && len(d.FieldViolations) > 0 {
			return d.FieldViolations[0].Field
		}
	}
	return ""
}

func TestGatewayJSON(t *testing.T) {
	ts := startServer(t, testConfig(), &fakeAnalyzer{}, nil, false)
	cut := 8.0
	body, err := protojson.Marshal(&kinchainv1.AnalyzeCaptureRequest{Capture: goodCapture("json-1", 40), Options: &kinchainv1.AnalysisOptions{CutoffHz: &cut}})
	if err != nil {
		t.Fatal(err)
	}
	for _, m := range []string{http.MethodPost, http.MethodPut} {
		code, hdr, b := httpDo(t, m, ts.httpURL("/v1/captures:analyze"), "application/json", bytes.NewReader(body))
		if code != http.StatusOK {
			t.Fatalf("%s: %d %s", m, code, b)
		}
		var resp kinchainv1.AnalyzeCaptureResponse
		if err := protojson.Unmarshal(b, &resp); err != nil {
			t.Fatal(err)
		}
		if resp.GetCaptureId() != "json-1" || resp.GetSampleRateHz() != 8 || resp.GetQuality().GetTracks()[1].GetSamples() != 40 {
			t.Errorf("%s: response %v does not echo the request", m, &resp)
		}
		// Field names as in the OpenAPI document (proto names).
		if !bytes.Contains(b, []byte(`"capture_id"`)) {
			t.Errorf("%s: response JSON does not use proto field names: %s", m, b)
		}
		if len(hdr.Get("X-Request-Id")) != 32 {
			t.Errorf("%s: X-Request-Id = %q", m, hdr.Get("X-Request-Id"))
		}
	}
	// No Content-Type (curl -T): sniffed as JSON.
	code, _, b := httpDo(t, http.MethodPut, ts.httpURL("/v1/captures:analyze"), "", bytes.NewReader(body))
	if code != http.StatusOK {
		t.Errorf("PUT without Content-Type: %d %s", code, b)
	}
}

func TestGatewayCSV(t *testing.T) {
	ts := startServer(t, testConfig(), &fakeAnalyzer{}, nil, false)
	url := ts.httpURL("/v1/captures:analyze?cutoff_hz=10&speed=vertical&include_series=true&handedness=left")
	for _, tc := range []struct{ method, ct string }{
		{http.MethodPost, "text/csv"},
		{http.MethodPost, "text/csv; charset=utf-8"},
		{http.MethodPut, ""},                         // curl -T file.csv
		{http.MethodPut, "application/octet-stream"}, // some clients' default
	} {
		code, _, b := httpDo(t, tc.method, url, tc.ct, strings.NewReader(goodCSV("csv-1", 30)))
		if code != http.StatusOK {
			t.Fatalf("%s %q: %d %s", tc.method, tc.ct, code, b)
		}
		var resp kinchainv1.AnalyzeCaptureResponse
		if err := protojson.Unmarshal(b, &resp); err != nil {
			t.Fatal(err)
		}
		if resp.GetCaptureId() != "csv-1" || len(resp.GetQuality().GetTracks()) != 2 || resp.GetQuality().GetTracks()[0].GetSamples() != 30 {
			t.Errorf("%s %q: response %v does not echo the capture", tc.method, tc.ct, &resp)
		}
		if resp.GetSampleRateHz() != 10 || resp.GetSpeed() != kinchainv1.SpeedDefinition_SPEED_DEFINITION_VERTICAL || resp.GetHandedness() != kinchainv1.Handedness_HANDEDNESS_LEFT {
			t.Errorf("%s %q: query options lost: %v", tc.method, tc.ct, &resp)
		}
	}
}

func TestGatewayBadRequests(t *testing.T) {
	cfg := testConfig()
	cfg.MaxRecvMsgBytes = 64 << 10
	ts := startServer(t, cfg, &fakeAnalyzer{}, nil, false)
	analyze := ts.httpURL("/v1/captures:analyze")

	cp := goodCapture("bad", 30)
	cp.Tracks[0].Qw[4] = 0 // zero-norm quaternion at sample 4 of track 0
	cp.Tracks[0].Qx[4] = 0
	bad, _ := protojson.Marshal(&kinchainv1.AnalyzeCaptureRequest{Capture: cp})
	badCSV := strings.Replace(goodCSV("bad", 30), "0.05,thorax,1,0,0,0", "0.05,thorax,1,0,0", 1)

	cases := []struct {
		name, method, url, ct, body string
		code                        int
		field                       string
	}{
		{"validation JSON", "POST", analyze, "application/json", string(bad), 400, "capture.tracks[0].qw[4]"},
		{"malformed JSON", "POST", analyze, "application/json", `{"capture": {"tracks": 7}}`, 400, "capture.tracks"},
		{"unknown JSON field", "POST", analyze, "application/json", `{"capture": {"capture_id": "x"}, "nope": 1}`, 400, "nope"},
		{"JSON syntax", "POST", analyze, "application/json", `{"capture": {"capture_id": "x"`, 400, "capture"},
		{"malformed CSV", "POST", analyze, "text/csv", badCSV, 400, ""},
		{"unknown query parameter", "POST", analyze + "?cutof_hz=3", "text/csv", goodCSV("q", 20), 400, "cutof_hz"},
		{"bad query value", "POST", analyze + "?speed=sideways", "text/csv", goodCSV("q", 20), 400, "speed"},
		{"query with JSON", "POST", analyze + "?cutoff_hz=3", "application/json", string(bad), 400, "query"},
		{"unsupported type", "POST", analyze, "image/png", "x", 415, "Content-Type"},
		{"too large (Content-Length)", "POST", analyze, "text/csv", goodCSV("big", 3000), 413, "body"},
		{"wrong method", "GET", analyze, "", "", 405, ""},
		{"unknown path", "GET", ts.httpURL("/v2/nothing"), "", "", 404, ""},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			code, _, b := httpDo(t, tc.method, tc.url, tc.ct, strings.NewReader(tc.body))
			if code != tc.code {
				t.Fatalf("status %d, want %d: %s", code, tc.code, b)
			}
			if code == 405 {
				return
			}
			st := decodeStatus(t, b)
			if tc.field != "" && st.firstField() != tc.field {
				t.Errorf("field violation %q, want %q: %s", st.firstField(), tc.field, b)
			}
			if st.Message == "" {
				t.Errorf("no message: %s", b)
			}
		})
	}

	// The CSV error names the file line.
	_, _, b := httpDo(t, "POST", analyze, "text/csv", strings.NewReader(badCSV))
	if st := decodeStatus(t, b); !strings.Contains(st.Message, "line ") {
		t.Errorf("CSV error does not name the line: %s", b)
	}

	// Too large without Content-Length (chunked upload): still 413.
	pr, pw := io.Pipe()
	go func() {
		_, _ = io.WriteString(pw, goodCSV("big", 3000))
		pw.Close()
	}()
	code, _, b := httpDo(t, "POST", analyze, "text/csv", struct{ io.Reader }{pr})
	if code != http.StatusRequestEntityTooLarge {
		t.Errorf("chunked oversized body: %d %s, want 413", code, b)
	}
	pr2, pw2 := io.Pipe()
	big, _ := protojson.Marshal(&kinchainv1.AnalyzeCaptureRequest{Capture: goodCapture("big", 6000)})
	go func() {
		_, _ = pw2.Write(big)
		pw2.Close()
	}()
	code, _, b = httpDo(t, "POST", analyze, "application/json", struct{ io.Reader }{pr2})
	if code != http.StatusRequestEntityTooLarge {
		t.Errorf("chunked oversized JSON: %d %s, want 413", code, b)
	}
}

func TestGatewayTooManyRequests(t *testing.T) {
	fa := &fakeAnalyzer{gate: make(chan struct{}), started: make(chan struct{}, 4)}
	cfg := testConfig()
	cfg.MaxConcurrentRequests = 1
	ts := startServer(t, cfg, fa, nil, false)
	done := make(chan int, 1)
	go func() {
		code, _, _ := httpDo(t, "POST", ts.httpURL("/v1/captures:analyze"), "text/csv", strings.NewReader(goodCSV("hold", 20)))
		done <- code
	}()
	<-fa.started
	// The slot is shared with gRPC: both transports are refused.
	code, hdr, b := httpDo(t, "POST", ts.httpURL("/v1/captures:analyze"), "text/csv", strings.NewReader(goodCSV("x", 20)))
	if code != http.StatusTooManyRequests || hdr.Get("Retry-After") == "" {
		t.Errorf("HTTP while saturated: %d Retry-After=%q %s, want 429 with Retry-After", code, hdr.Get("Retry-After"), b)
	}
	if _, err := ts.client().AnalyzeCapture(context.Background(), &kinchainv1.AnalyzeCaptureRequest{Capture: goodCapture("g", 20)}); err == nil || !strings.Contains(err.Error(), "ResourceExhausted") {
		t.Errorf("gRPC while HTTP holds the slot: %v, want ResourceExhausted", err)
	}
	close(fa.gate)
	if c := <-done; c != http.StatusOK {
		t.Errorf("held request: %d", c)
	}
}

func TestHTTPExtras(t *testing.T) {
	ts := startServer(t, testConfig(), &fakeAnalyzer{}, nil, false)
	code, _, b := httpDo(t, "GET", ts.httpURL("/openapi.json"), "", nil)
	if code != 200 || !bytes.Equal(b, openapi.JSON) {
		t.Errorf("/openapi.json: %d, %d bytes", code, len(b))
	}
	var doc map[string]any
	if err := json.Unmarshal(b, &doc); err != nil || doc["swagger"] != "2.0" {
		t.Errorf("/openapi.json is not an OpenAPI v2 document: %v", err)
	}
	for _, p := range []string{"/healthz", "/readyz"} {
		if code, _, b := httpDo(t, "GET", ts.httpURL(p), "", nil); code != 200 {
			t.Errorf("%s: %d %s", p, code, b)
		}
	}
	// HandleHTTP adds a route with the server's middleware.
	ts.srv.HandleHTTP("POST /v1/captures:echo", http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		if _, err := io.ReadAll(r.Body); err != nil {
			ts.srv.WriteHTTPError(w, r, err)
			return
		}
		_, _ = io.WriteString(w, "ok")
	}))
	code, hdr, b := httpDo(t, "POST", ts.httpURL("/v1/captures:echo"), "text/plain", strings.NewReader("hi"))
	if code != 200 || string(b) != "ok" || hdr.Get("X-Request-Id") == "" {
		t.Errorf("extra route: %d %q request-id=%q", code, b, hdr.Get("X-Request-Id"))
	}
}
