package plot_test

import (
	"bytes"
	"context"
	"encoding/json"
	"encoding/xml"
	"image/png"
	"io"
	"log/slog"
	"net/http"
	"strings"
	"testing"
	"time"

	"google.golang.org/protobuf/encoding/protojson"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/encode"
	"github.com/kinchain/kinchain/internal/engine"
	"github.com/kinchain/kinchain/internal/plot"
	"github.com/kinchain/kinchain/internal/server"
	"github.com/kinchain/kinchain/internal/synth"
)

// TestMountedOnServer mounts the plot endpoint on a real server (loopback,
// ephemeral ports) the way `kinchain serve` is meant to, with the server's
// own query parser and error writer, and drives it over HTTP with the model
// golfer: CSV and JSON bodies, PNG and SVG, and the error statuses.
func TestMountedOnServer(t *testing.T) {
	if testing.Short() {
		t.Skip("starts a server; skipped with -short")
	}
	eng := engine.New(engine.Config{})
	cfg := server.DefaultConfig()
	cfg.GRPCAddr, cfg.HTTPAddr, cfg.MetricsAddr = "127.0.0.1:0", "127.0.0.1:0", ""
	cfg.MaxRecvMsgBytes = 16 << 20
	srv, err := server.New(cfg, eng, nil, nil, slog.New(slog.NewTextHandler(io.Discard, nil)))
	if err != nil {
		t.Fatal(err)
	}
	srv.HandleHTTP("POST /v1/captures:plot", plot.Handler(eng, plot.HandlerConfig{
		MaxBodyBytes: int64(cfg.MaxRecvMsgBytes),
		QueryOptions: server.QueryOptions,
		WriteError:   srv.WriteHTTPError,
	}))
	ctx, cancel := context.WithCancel(context.Background())
	done := make(chan error, 1)
	go func() { done <- srv.Serve(ctx) }()
	t.Cleanup(func() {
		cancel()
		select {
		case <-done:
		case <-time.After(30 * time.Second):
			t.Error("server did not stop")
		}
	})
	base := "http://" + srv.Addrs().HTTP

	capt, _, err := synth.Generate(synth.Config{})
	if err != nil {
		t.Fatal(err)
	}
	var csv bytes.Buffer
	if err := encode.WriteCaptureCSV(&csv, capt); err != nil {
		t.Fatal(err)
	}
	js, err := protojson.Marshal(&kinchainv1.AnalyzeCaptureRequest{Capture: capt})
	if err != nil {
		t.Fatal(err)
	}
	client := &http.Client{Timeout: 60 * time.Second}
	post := func(query, contentType, accept string, body []byte) (int, http.Header, []byte) {
		t.Helper()
		req, err := http.NewRequest(http.MethodPost, base+"/v1/captures:plot"+query, bytes.NewReader(body))
		if err != nil {
			t.Fatal(err)
		}
		req.Header.Set("Content-Type", contentType)
		if accept != "" {
			req.Header.Set("Accept", accept)
		}
		resp, err := client.Do(req)
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

	// CSV with the server's short option syntax, answered as PNG.
	code, hdr, b := post("?speed=vertical&cutoff_hz=15&width=900", "text/csv", "image/png", csv.Bytes())
	if code != 200 || hdr.Get("Content-Type") != "image/png" {
		t.Fatalf("CSV → PNG: %d %s: %.300s", code, hdr.Get("Content-Type"), b)
	}
	if img, err := png.Decode(bytes.NewReader(b)); err != nil || img.Bounds().Dx() != 900 {
		t.Fatalf("CSV → PNG: not a 900 px PNG (%v)", err)
	}
	// JSON, answered as SVG (no Accept).
	code, hdr, b = post("", "application/json", "", js)
	if code != 200 || hdr.Get("Content-Type") != "image/svg+xml" {
		t.Fatalf("JSON → SVG: %d %s: %.300s", code, hdr.Get("Content-Type"), b)
	}
	if err := xml.Unmarshal(b, new(struct{})); err != nil {
		t.Fatalf("JSON → SVG: not XML: %v", err)
	}

	// Errors: a google.rpc.Status naming the field, with the right code.
	type statusJSON struct {
		Code    int
		Message string
		Details []struct {
			FieldViolations []struct{ Field string } `json:"field_violations"`
		}
	}
	for _, c := range []struct {
		name, query, contentType, accept string
		body                             []byte
		code                             int
		field                            string
	}{
		{"Accept", "", "text/csv", "text/html", csv.Bytes(), 406, "Accept"},
		{"swing", "?swing=5", "text/csv", "", csv.Bytes(), 400, "swing"},
		{"option", "?speed=sideways", "text/csv", "", csv.Bytes(), 400, "speed"},
		{"bad CSV", "", "text/csv", "", []byte("segment,time_s,qw,qx,qy,qz\ntail,0,1,0,0,0\n"), 400, ""},
		{"too large", "", "text/csv", "", bytes.Repeat([]byte("x"), 17<<20), 413, "body"},
	} {
		code, hdr, b := post(c.query, c.contentType, c.accept, c.body)
		if code != c.code {
			t.Errorf("%s: status %d, want %d: %.300s", c.name, code, c.code, b)
			continue
		}
		var st statusJSON
		if err := json.Unmarshal(b, &st); err != nil || st.Message == "" || !strings.HasPrefix(hdr.Get("Content-Type"), "application/json") {
			t.Errorf("%s: not a JSON status (%v): %.300s", c.name, err, b)
			continue
		}
		if c.field != "" && (len(st.Details) == 0 || len(st.Details[0].FieldViolations) == 0 || st.Details[0].FieldViolations[0].Field != c.field) {
			t.Errorf("%s: field violation missing or not %q: %.300s", c.name, c.field, b)
		}
	}
}
