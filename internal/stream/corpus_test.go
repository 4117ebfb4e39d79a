package stream_test

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"log/slog"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"google.golang.org/genproto/googleapis/rpc/errdetails"
	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/credentials/insecure"
	"google.golang.org/grpc/status"
	"google.golang.org/protobuf/encoding/protojson"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/engine"
	"github.com/kinchain/kinchain/internal/server"
	"github.com/kinchain/kinchain/internal/stream"
	"github.com/kinchain/kinchain/internal/validate"
)

// corpusCase is one file of testdata/bad-stream (see its README.md).
type corpusCase struct {
	Description string `json:"description"`
	Expect      struct {
		Field    string `json:"field"`
		Reason   string `json:"reason"`
		Message  int    `json:"message"`
		Protocol bool   `json:"protocol"`
	} `json:"expect"`
	Messages []json.RawMessage `json:"messages"`
}

func loadCorpus(t *testing.T) map[string]corpusCase {
	t.Helper()
	files, err := filepath.Glob(filepath.Join("..", "..", "testdata", "bad-stream", "*.json"))
	if err != nil || len(files) == 0 {
		t.Fatalf("no corpus files (%v)", err)
	}
	out := map[string]corpusCase{}
	for _, f := range files {
		data, err := os.ReadFile(f)
		if err != nil {
			t.Fatal(err)
		}
		var c corpusCase
		if err := json.Unmarshal(data, &c); err != nil {
			t.Fatalf("%s: %v", f, err)
		}
		if c.Expect.Message < 0 || c.Expect.Message >= len(c.Messages) || c.Expect.Field == "" || c.Expect.Reason == "" {
			t.Fatalf("%s: bad expect %+v", f, c.Expect)
		}
		out[strings.TrimSuffix(filepath.Base(f), ".json")] = c
	}
	return out
}

func requests(t *testing.T, c corpusCase) []*kinchainv1.StreamCaptureRequest {
	t.Helper()
	var reqs []*kinchainv1.StreamCaptureRequest
	for i, m := range c.Messages {
		r := &kinchainv1.StreamCaptureRequest{}
		if err := protojson.Unmarshal(m, r); err != nil {
			t.Fatalf("message %d: %v", i, err)
		}
		reqs = append(reqs, r)
	}
	return reqs
}

// fieldPath is a validation error's path with its sample, as the server
// reports it.
func fieldPath(e *validate.Error) string {
	if e.Sample >= 0 {
		return fmt.Sprintf("%s[%d]", e.Field, e.Sample)
	}
	return e.Field
}

// TestBadStreamCorpus replays every bad stream of testdata/bad-stream into
// a session and through the gRPC service, and checks that it is refused at
// the expected message with the expected field and reason.
func TestBadStreamCorpus(t *testing.T) {
	corpus := loadCorpus(t)
	addr := startServer(t)
	conn, err := grpc.NewClient(addr, grpc.WithTransportCredentials(insecure.NewCredentials()))
	if err != nil {
		t.Fatal(err)
	}
	defer conn.Close()
	client := kinchainv1.NewKinematicsServiceClient(conn)
	for name, c := range corpus {
		t.Run(name, func(t *testing.T) {
			reqs := requests(t, c)
			if !c.Expect.Protocol {
				checkSession(t, c, reqs)
			}
			checkServer(t, client, c, reqs)
		})
	}
}

// checkSession drives a Session with the messages: all before the bad one
// must pass.
func checkSession(t *testing.T, c corpusCase, reqs []*kinchainv1.StreamCaptureRequest) {
	var s *stream.Session
	for i, r := range reqs {
		var err error
		switch {
		case r.GetHeader() != nil:
			if s != nil {
				t.Fatalf("message %d: a second header in a session case", i)
			}
			s, err = stream.NewSession(r.GetHeader(), stream.Limits{})
		case r.GetBatch() != nil:
			if s == nil {
				t.Fatalf("message %d: a batch before the header in a session case", i)
			}
			_, err = s.Push(r.GetBatch())
		default:
			t.Fatalf("message %d: empty in a session case", i)
		}
		if i < c.Expect.Message {
			if err != nil {
				t.Fatalf("message %d is good, got %v", i, err)
			}
			continue
		}
		var ve *validate.Error
		if !errors.As(err, &ve) {
			t.Fatalf("message %d: want a *validate.Error for %s, got %v", i, c.Expect.Field, err)
		}
		if got := fieldPath(ve); got != c.Expect.Field || strings.ToUpper(string(ve.Reason)) != c.Expect.Reason {
			t.Errorf("message %d: %s (%s), want %s (%s)", i, got, ve.Reason, c.Expect.Field, c.Expect.Reason)
		}
		if ve.Detail == "" || !strings.Contains(ve.Error(), c.Expect.Field) {
			t.Errorf("message %d: error text %q does not name %s", i, ve.Error(), c.Expect.Field)
		}
		if s != nil {
			// A refused batch leaves the session usable: Close still sums up.
			if sum := s.Close(); len(sum) == 0 || sum[len(sum)-1].GetSummary() == nil {
				t.Errorf("Close after a refused batch gave %v", sum)
			}
		}
		return
	}
}

// checkServer streams the messages over gRPC: the call must end with
// INVALID_ARGUMENT and a field violation for the expected field.
func checkServer(t *testing.T, client kinchainv1.KinematicsServiceClient, c corpusCase, reqs []*kinchainv1.StreamCaptureRequest) {
	ctx, cancel := context.WithTimeout(context.Background(), 20*time.Second)
	defer cancel()
	st, err := client.StreamCapture(ctx)
	if err != nil {
		t.Fatal(err)
	}
	for _, r := range reqs {
		if err := st.Send(r); err != nil {
			break // the server ended the call; Recv has the status
		}
	}
	_ = st.CloseSend()
	var final error
	for i := 0; i < 10000; i++ {
		if _, err := st.Recv(); err != nil {
			final = err
			break
		}
	}
	if final == nil || errors.Is(final, io.EOF) {
		t.Fatalf("the stream ended without an error (%v); want %s", final, c.Expect.Field)
	}
	sts := status.Convert(final)
	if sts.Code() != codes.InvalidArgument {
		t.Fatalf("status %v, want INVALID_ARGUMENT: %s", sts.Code(), sts.Message())
	}
	var found []string
	for _, d := range sts.Details() {
		if br, ok := d.(*errdetails.BadRequest); ok {
			for _, v := range br.GetFieldViolations() {
				found = append(found, v.GetField()+" "+v.GetReason())
				if v.GetField() == c.Expect.Field && v.GetReason() == c.Expect.Reason {
					return
				}
			}
		}
	}
	t.Errorf("field violations %v, want %s %s (message %q)", found, c.Expect.Field, c.Expect.Reason, sts.Message())
}

// startServer runs the kinchain gRPC service on a loopback port with
// stream sessions of the default limits, until the test ends.
func startServer(t testing.TB) string {
	t.Helper()
	cfg := server.DefaultConfig()
	cfg.GRPCAddr = "127.0.0.1:0"
	cfg.HTTPAddr = ""
	cfg.MetricsAddr = ""
	cfg.ShutdownGrace = 2 * time.Second
	factory := func(h *kinchainv1.StreamHeader) (server.StreamSession, error) {
		s, err := stream.NewSession(h, stream.Limits{})
		if err != nil {
			return nil, err
		}
		return s, nil
	}
	srv, err := server.New(cfg, engine.New(engine.Config{}), factory, nil, slog.New(slog.NewTextHandler(io.Discard, nil)))
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithCancel(context.Background())
	done := make(chan error, 1)
	go func() { done <- srv.Serve(ctx) }()
	t.Cleanup(func() {
		cancel()
		if err := <-done; err != nil {
			t.Errorf("server: %v", err)
		}
	})
	return srv.Addrs().GRPC
}
