package server_test

import (
	"bytes"
	"context"
	"fmt"
	"math"
	"net/http"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/encoding"
	"google.golang.org/grpc/mem"
	"google.golang.org/grpc/status"
	"google.golang.org/protobuf/encoding/protojson"
	"google.golang.org/protobuf/encoding/protowire"
	"google.golang.org/protobuf/proto"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/decode"
	"github.com/kinchain/kinchain/internal/decode/decodetest"
	"github.com/kinchain/kinchain/internal/engine"
	"github.com/kinchain/kinchain/internal/validate"
)

// The bad-input corpus (testdata/bad, see its README.md) through the
// service: every file is refused with INVALID_ARGUMENT / HTTP 400 naming
// the field and sample of cases.tsv, and a valid request right after each
// bad one succeeds (the process stays up and keeps serving).

var corpusDir = filepath.Join("..", "..", "testdata", "bad")

// corpusCase is one line of cases.tsv.
type corpusCase struct {
	file, decoder, limits string
	lim                   validate.Limits
	reason                validate.Reason
	field                 string
	line, sample          int
}

func readCorpus(t *testing.T) []corpusCase {
	t.Helper()
	var out []corpusCase
	for _, c := range decodetest.Cases(t) {
		out = append(out, corpusCase{file: c.File, decoder: c.Decoder, limits: c.Limits, lim: c.Lim, reason: c.Reason, field: c.Field, line: c.Line, sample: c.Sample})
	}
	if len(out) < 40 {
		t.Fatalf("only %d corpus cases", len(out))
	}
	return out
}

// path is the expected violation path: the validator's field with the
// sample appended, relative to a request when prefix is "capture".
func (c corpusCase) path(prefix string) string {
	fp := c.field
	if c.sample >= 0 && fp != "" {
		fp = fmt.Sprintf("%s[%d]", fp, c.sample)
	}
	switch {
	case prefix == "":
		return fp
	case fp == "":
		return prefix
	}
	return prefix + "." + fp
}

func (c corpusCase) reasonCode() string { return strings.ToUpper(string(c.reason)) }

func (c corpusCase) read(t *testing.T) []byte {
	t.Helper()
	b, err := os.ReadFile(filepath.Join(corpusDir, c.file))
	if err != nil {
		t.Fatal(err)
	}
	return b
}

// corpusServers runs one server with the real engine per set of limits.
type corpusServers struct {
	t    *testing.T
	byLS map[string]*testServer
}

func (cs *corpusServers) get(c corpusCase) *testServer {
	if ts := cs.byLS[c.limits]; ts != nil {
		return ts
	}
	ts := startServer(cs.t, testConfig(), engine.New(engine.Config{Limits: c.lim}), nil, false)
	cs.byLS[c.limits] = ts
	return ts
}

// rawCodec sends a []byte as the message as it is: the corpus files go
// over gRPC byte for byte, also the ones that do not decode.
type rawCodec struct{ encoding.CodecV2 }

func (c rawCodec) Marshal(v any) (mem.BufferSlice, error) {
	if b, ok := v.(*[]byte); ok {
		return mem.BufferSlice{mem.SliceBuffer(*b)}, nil
	}
	return c.CodecV2.Marshal(v)
}

func rawCallOption() grpc.CallOption {
	return grpc.ForceCodecV2(rawCodec{encoding.GetCodecV2("proto")})
}

// captureField wraps an encoded Capture as field 1 of an
// AnalyzeCaptureRequest.
func captureField(capture []byte) []byte {
	b := protowire.AppendTag(nil, 1, protowire.BytesType)
	return protowire.AppendBytes(b, capture)
}

// checkViolation checks a gRPC status for INVALID_ARGUMENT with a first
// violation naming field with reason.
func checkViolation(t *testing.T, err error, field, reason string, line int) {
	t.Helper()
	if status.Code(err) != codes.InvalidArgument {
		t.Fatalf("got %v, want InvalidArgument naming %s", err, field)
	}
	br := badRequest(t, err)
	v := br.GetFieldViolations()[0]
	if v.GetField() != field || v.GetReason() != reason {
		t.Errorf("violation %s %s, want %s %s (%v)", v.GetField(), v.GetReason(), field, reason, err)
	}
	if line > 0 && !strings.Contains(v.GetDescription(), fmt.Sprintf("line %d", line)) {
		t.Errorf("description %q does not name line %d", v.GetDescription(), line)
	}
}

// TestBadCorpusGRPC sends every corpus file to AnalyzeCapture: the binary
// protobuf files byte for byte as the request's capture (also those that do
// not decode), the others decoded by decode when they decode (the rest go
// through HTTP in TestBadCorpusHTTP). Each must fail with INVALID_ARGUMENT
// and an errdetails.BadRequest violation naming the field and sample,
// and a good capture must pass right after.
func TestBadCorpusGRPC(t *testing.T) {
	cs := &corpusServers{t: t, byLS: map[string]*testServer{}}
	clients := map[*testServer]kinchainv1.KinematicsServiceClient{}
	conns := map[*testServer]*grpc.ClientConn{}
	sent := 0
	for _, c := range readCorpus(t) {
		t.Run(c.file, func(t *testing.T) {
			ts := cs.get(c)
			if clients[ts] == nil {
				conns[ts] = ts.conn()
				clients[ts] = kinchainv1.NewKinematicsServiceClient(conns[ts])
			}
			b := c.read(t)
			var err error
			switch {
			case strings.HasSuffix(c.file, ".pb"):
				in := captureField(b)
				err = conns[ts].Invoke(context.Background(), kinchainv1.KinematicsService_AnalyzeCapture_FullMethodName, &in, &kinchainv1.AnalyzeCaptureResponse{}, rawCallOption())
			case c.decoder == "request":
				req, derr := decode.JSONRequest(b)
				if derr != nil {
					t.Skipf("does not decode (%v): checked over HTTP", derr)
				}
				_, err = clients[ts].AnalyzeCapture(context.Background(), req)
			default:
				pc, _, derr := decode.File(c.file, b, c.lim)
				if derr != nil {
					t.Skipf("does not decode (%v): checked over HTTP", derr)
				}
				_, err = clients[ts].AnalyzeCapture(context.Background(), &kinchainv1.AnalyzeCaptureRequest{Capture: pc})
			}
			sent++
			want := c.path("capture")
			if c.decoder == "request" {
				want = c.path("")
			}
			if c.file == "pb_empty.pb" {
				// An empty file is a request whose capture is present
				// and empty: named as a capture without tracks.
				want = "capture.tracks"
			}
			checkViolation(t, err, want, c.reasonCode(), 0)
			// The server is still there.
			if _, err := clients[ts].AnalyzeCapture(context.Background(), &kinchainv1.AnalyzeCaptureRequest{Capture: smallCapture()}); err != nil {
				t.Fatalf("good capture after %s: %v", c.file, err)
			}
		})
	}
	if sent < 40 {
		t.Errorf("only %d corpus files went over gRPC", sent)
	}
}

// TestBadCorpusHTTP posts every corpus file's bytes to
// /v1/captures:analyze: CSV as text/csv, capture JSON wrapped as
// {"capture": …} and bare (the gateway reads a body without "capture" and
// "options" members as a Capture), request JSON as it is, binary protobuf
// as application/x-protobuf (a Capture) and wrapped as a request with
// proto=kinchain.v1.AnalyzeCaptureRequest. Each must be 400 with the
// field violation in the JSON detail; a valid request follows each.
func TestBadCorpusHTTP(t *testing.T) {
	cs := &corpusServers{t: t, byLS: map[string]*testServer{}}
	good := smallCSV()
	for _, c := range readCorpus(t) {
		t.Run(c.file, func(t *testing.T) {
			ts := cs.get(c)
			b := c.read(t)
			type post struct {
				name, ct string
				body     []byte
				field    string
			}
			var posts []post
			switch {
			case strings.HasSuffix(c.file, ".csv"):
				// Decoding errors name the CSV's own fields (columns,
				// metadata keys, tracks); what the engine's validation
				// finds after decoding is named relative to the request.
				want := c.path("")
				if _, _, derr := decode.CSV(bytes.NewReader(b), c.lim); derr == nil {
					want = c.path("capture")
				}
				if want == "" {
					want = "body"
				}
				posts = append(posts, post{"csv", "text/csv", b, want})
			case c.decoder == "request":
				posts = append(posts, post{"request", "application/json", b, c.path("")})
			case strings.HasSuffix(c.file, ".json"):
				wrapped := append(append([]byte(`{"capture":`), b...), '}')
				posts = append(posts, post{"wrapped", "application/json", wrapped, c.path("capture")})
				switch {
				case c.file == "json_request_as_capture.json": // a request: fine as a body
				case c.field == "": // not an object: refused as a body
					posts = append(posts, post{"bare", "application/json", b, "body"})
				default:
					posts = append(posts, post{"bare", "application/json", b, c.path("capture")})
				}
			case strings.HasSuffix(c.file, ".pb"):
				posts = append(posts, post{"capture", "application/x-protobuf", b, c.path("capture")})
				want := c.path("capture")
				if c.file == "pb_empty.pb" {
					want = "capture.tracks" // as over gRPC
				}
				posts = append(posts, post{"request", "application/x-protobuf; proto=kinchain.v1.AnalyzeCaptureRequest", captureField(b), want})
			default:
				t.Fatalf("no format for %s", c.file)
			}
			for _, p := range posts {
				code, _, body := httpDo(t, http.MethodPost, ts.httpURL("/v1/captures:analyze"), p.ct, bytes.NewReader(p.body))
				if code != http.StatusBadRequest {
					t.Fatalf("%s: status %d, want 400: %s", p.name, code, body)
				}
				st := decodeStatus(t, body)
				if st.Code != int(codes.InvalidArgument) {
					t.Errorf("%s: code %d", p.name, st.Code)
				}
				var got, reason, desc string
				for _, d := range st.Details {
					if len(d.FieldViolations) > 0 {
						got, reason, desc = d.FieldViolations[0].Field, d.FieldViolations[0].Reason, d.FieldViolations[0].Description
					}
				}
				if got != p.field || reason != c.reasonCode() {
					t.Errorf("%s: violation %q %s, want %q %s: %s", p.name, got, reason, p.field, c.reasonCode(), body)
				}
				if c.line > 0 && !strings.Contains(desc, fmt.Sprintf("line %d", c.line)) {
					t.Errorf("%s: description %q does not name line %d", p.name, desc, c.line)
				}
				// A valid request right after (or, where the case's
				// limits leave no room for one, a probe).
				if c.lim.MaxBytes > 0 && c.lim.MaxBytes < len(good) {
					if code, _, body := httpDo(t, http.MethodGet, ts.httpURL("/readyz"), "", nil); code != http.StatusOK {
						t.Fatalf("readyz after %s: %d %s", c.file, code, body)
					}
					continue
				}
				if code, _, body := httpDo(t, http.MethodPost, ts.httpURL("/v1/captures:analyze"), "text/csv", strings.NewReader(good)); code != http.StatusOK {
					t.Fatalf("good CSV after %s (%s): %d %s", c.file, p.name, code, body)
				}
			}
		})
	}
}

// TestBareCaptureAndProtobufBodies: the bodies the corpus test refuses
// are accepted when they are good: a bare Capture JSON, a binary Capture
// with options from the query, a binary request, and a protobuf answer
// when Accept asks for one.
func TestBareCaptureAndProtobufBodies(t *testing.T) {
	ts := startServer(t, testConfig(), &fakeAnalyzer{}, nil, false)
	url := ts.httpURL("/v1/captures:analyze")
	capJSON, _ := protojson.Marshal(goodCapture("bare", 20))
	code, _, b := httpDo(t, "POST", url, "application/json", bytes.NewReader(capJSON))
	if code != 200 || !strings.Contains(string(b), `"capture_id":"bare"`) {
		t.Errorf("bare capture JSON: %d %s", code, b)
	}
	pb, _ := proto.Marshal(goodCapture("pb", 20))
	code, _, b = httpDo(t, "POST", url+"?speed=vertical", "application/x-protobuf", bytes.NewReader(pb))
	if code != 200 || !strings.Contains(string(b), `"capture_id":"pb"`) || !strings.Contains(string(b), "VERTICAL") {
		t.Errorf("binary capture: %d %s", code, b)
	}
	reqPB, _ := proto.Marshal(&kinchainv1.AnalyzeCaptureRequest{Capture: goodCapture("pbreq", 20), Options: &kinchainv1.AnalysisOptions{Handedness: kinchainv1.Handedness_HANDEDNESS_LEFT}})
	req, _ := http.NewRequest("POST", url, bytes.NewReader(reqPB))
	req.Header.Set("Content-Type", "application/x-protobuf; proto=kinchain.v1.AnalyzeCaptureRequest")
	req.Header.Set("Accept", "application/x-protobuf")
	resp, err := http.DefaultClient.Do(req)
	if err != nil {
		t.Fatal(err)
	}
	defer resp.Body.Close()
	var buf bytes.Buffer
	_, _ = buf.ReadFrom(resp.Body)
	var out kinchainv1.AnalyzeCaptureResponse
	if resp.StatusCode != 200 || resp.Header.Get("Content-Type") != "application/x-protobuf" || proto.Unmarshal(buf.Bytes(), &out) != nil ||
		out.GetCaptureId() != "pbreq" || out.GetHandedness() != kinchainv1.Handedness_HANDEDNESS_LEFT {
		t.Errorf("binary request with protobuf answer: %d %q %v", resp.StatusCode, resp.Header.Get("Content-Type"), &out)
	}
	// A binary request does not take query options.
	code, _, b = httpDo(t, "POST", url+"?speed=vertical", "application/x-protobuf; proto=kinchain.v1.AnalyzeCaptureRequest", bytes.NewReader(reqPB))
	if code != 400 || decodeStatus(t, b).firstField() != "query" {
		t.Errorf("binary request with a query: %d %s", code, b)
	}
}

// smallCapture is a valid capture the real engine analyses within every
// lowered limit of the corpus but max_bytes: one pelvis track of 20
// samples at 100 Hz turning slowly about the vertical.
func smallCapture() *kinchainv1.Capture {
	tr := &kinchainv1.Track{Segment: kinchainv1.Segment_SEGMENT_PELVIS}
	for i := 0; i < 20; i++ {
		h := 0.01 * float64(i) // half-angle, rad
		tr.TimeS = append(tr.TimeS, float64(i)/100)
		tr.Qw, tr.Qx, tr.Qy, tr.Qz = append(tr.Qw, math.Cos(h)), append(tr.Qx, 0), append(tr.Qy, 0), append(tr.Qz, math.Sin(h))
	}
	return &kinchainv1.Capture{CaptureId: "small", Tracks: []*kinchainv1.Track{tr}}
}

// smallCSV is smallCapture in the CSV capture format.
func smallCSV() string {
	var b strings.Builder
	b.WriteString("time_s,segment,qw,qx,qy,qz\n")
	for i := 0; i < 20; i++ {
		h := 0.01 * float64(i)
		fmt.Fprintf(&b, "%g,pelvis,%.9f,0,0,%.9f\n", float64(i)/100, math.Cos(h), math.Sin(h))
	}
	return b.String()
}
