// Package httpbody decides what an HTTP request body holds — protojson or
// the CSV capture format — for the gateway's analysis and plot routes, so
// that both accept the same bodies.
package httpbody

import (
	"bufio"
	"io"
	"mime"
	"net/http"
	"strings"
)

// Kind is the format of a request body.
type Kind int

const (
	// JSON is protojson (application/json or any +json type).
	JSON Kind = iota
	// CSV is the CSV capture format (text/csv or application/csv).
	CSV
	// Unsupported is any other declared Content-Type.
	Unsupported
)

// Classify decides the body kind from the Content-Type. When the type says
// nothing useful — none, application/octet-stream (what curl -T sends),
// application/x-www-form-urlencoded (curl -d) or text/plain — it sniffs the
// first non-space byte: '{' is JSON, anything else CSV. The returned request
// reads the same body from the start.
func Classify(r *http.Request) (Kind, *http.Request) {
	ct := r.Header.Get("Content-Type")
	mt := ""
	if ct != "" {
		m, _, err := mime.ParseMediaType(ct)
		if err != nil {
			return Unsupported, r
		}
		mt = m
	}
	switch {
	case mt == "text/csv" || mt == "application/csv":
		return CSV, r
	case mt == "application/json" || strings.HasSuffix(mt, "+json"):
		return JSON, r
	case mt == "" || mt == "application/octet-stream" || mt == "application/x-www-form-urlencoded" || mt == "text/plain":
		br := bufio.NewReaderSize(r.Body, 512)
		r2 := r.Clone(r.Context())
		r2.Body = struct {
			io.Reader
			io.Closer
		}{br, r.Body}
		kind := CSV
		b, _ := br.Peek(512) // fewer bytes at EOF; read errors surface later
		if t := strings.TrimLeft(string(b), " \t\r\n"); strings.HasPrefix(t, "{") {
			kind = JSON
		}
		return kind, r2
	}
	return Unsupported, r
}
