package cli

import (
	"bytes"
	"context"
	"fmt"
	"io"
	"log/slog"
	"net"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/encode"
	"github.com/kinchain/kinchain/internal/engine"
	"github.com/kinchain/kinchain/internal/server"
	"github.com/kinchain/kinchain/internal/stream"
	"github.com/kinchain/kinchain/internal/synth"
)

// streamServer runs the kinchain gRPC service on a loopback port, with
// stream sessions of limits lim, until the test ends.
func streamServer(t *testing.T, lim stream.Limits) string {
	return streamServerWith(t, lim, nil)
}

// streamServerWith is streamServer with the server configuration changed
// by edit first.
func streamServerWith(t *testing.T, lim stream.Limits, edit func(*server.Config)) string {
	t.Helper()
	cfg := server.DefaultConfig()
	cfg.GRPCAddr = "127.0.0.1:0"
	cfg.HTTPAddr, cfg.MetricsAddr = "", ""
	cfg.ShutdownGrace = 2 * time.Second
	if edit != nil {
		edit(&cfg)
	}
	factory := func(h *kinchainv1.StreamHeader) (server.StreamSession, error) {
		s, err := stream.NewSession(h, lim)
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

func runStream(args ...string) (string, string, error) {
	var out, errb bytes.Buffer
	err := RunStream(context.Background(), args, strings.NewReader(""), &out, &errb)
	return out.String(), errb.String(), err
}

// TestRunStreamDemo replays the model golfer as fast as possible and checks
// the printed events and report against the unary analysis of the same
// capture (engine.Analyze), the reference the stream must agree with.
func TestRunStreamDemo(t *testing.T) {
	addr := streamServer(t, stream.Limits{})
	out, _, err := runStream("--addr", addr, "--pace", "0", "--demo")
	if err != nil {
		t.Fatalf("%v\n%s", err, out)
	}
	capt, _, err := synth.Generate(synth.Config{})
	if err != nil {
		t.Fatal(err)
	}
	want, err := engine.New(engine.Config{}).Analyze(context.Background(), &kinchainv1.AnalyzeCaptureRequest{Capture: capt})
	if err != nil || len(want.Swings) != 1 {
		t.Fatalf("unary: %v, %d swings", err, len(want.Swings))
	}
	lines := strings.Split(out, "\n")
	events := 0
	for _, l := range lines {
		if strings.HasSuffix(l, " ms") && strings.Contains(l, " s  ") {
			events++
		}
	}
	if events != 7 {
		t.Errorf("%d event lines, want 7 (address, takeaway, two lead-arm levels, top, impact, finish):\n%s", events, out)
	}
	for _, k := range []kinchainv1.EventKind{kinchainv1.EventKind_EVENT_KIND_ADDRESS, kinchainv1.EventKind_EVENT_KIND_TOP,
		kinchainv1.EventKind_EVENT_KIND_IMPACT, kinchainv1.EventKind_EVENT_KIND_FINISH} {
		if !strings.Contains(out, encode.EventLabel(k)) {
			t.Errorf("no %s line:\n%s", encode.EventLabel(k), out)
		}
	}
	// The report line lists the unary analysis's event times.
	for _, e := range want.Swings[0].Events {
		s := fmt.Sprintf("%s %.3f s", encode.EventLabel(e.Kind), e.TimeS)
		if !strings.Contains(out, s) {
			t.Errorf("report lacks %q:\n%s", s, out)
		}
	}
	if !strings.Contains(out, "swing 0 report:") || !strings.Contains(out, "summary: 33750 samples over 3.374 s, 1 swing reported") {
		t.Errorf("no report or summary:\n%s", out)
	}
}

// TestRunStreamFile replays a CSV file of two swings in 50 ms batches.
func TestRunStreamFile(t *testing.T) {
	addr := streamServer(t, stream.Limits{})
	capt, _, err := synth.Generate(synth.Config{Swings: 2, Segments: []kinchainv1.Segment{
		kinchainv1.Segment_SEGMENT_PELVIS, kinchainv1.Segment_SEGMENT_THORAX, kinchainv1.Segment_SEGMENT_LEAD_HAND}})
	if err != nil {
		t.Fatal(err)
	}
	path := filepath.Join(t.TempDir(), "two.csv")
	var buf bytes.Buffer
	if err := encode.WriteCaptureCSV(&buf, capt); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(path, buf.Bytes(), 0o644); err != nil {
		t.Fatal(err)
	}
	out, _, err := runStream(path, "--addr", addr, "--pace", "0", "--batch-ms", "50", "--cutoff-hz", "15")
	if err != nil {
		t.Fatalf("%v\n%s", err, out)
	}
	for _, s := range []string{"3 segments, 1000 Hz", "in 50 ms batches", "swing 0 report:", "swing 1 report:", "2 swings reported", "fastest lead_hand"} {
		if !strings.Contains(out, s) {
			t.Errorf("output lacks %q:\n%s", s, out)
		}
	}
}

// TestRunStreamPace: at --pace 10 the 3.374 s demo takes at least a tenth
// of its length of wall clock (a lower bound only; the machine may be
// slower, never faster).
func TestRunStreamPace(t *testing.T) {
	addr := streamServer(t, stream.Limits{})
	start := time.Now()
	if out, _, err := runStream("--addr", addr, "--pace", "10", "--batch-ms", "20", "--demo"); err != nil {
		t.Fatalf("%v\n%s", err, out)
	}
	if el := time.Since(start); el < 337*time.Millisecond-20*time.Millisecond {
		t.Errorf("replay at 10× took %v, less than 3.374 s / 10", el)
	}
}

// TestRunStreamRefused: the server's refusal ends the command with its
// status and field.
func TestRunStreamRefused(t *testing.T) {
	addr := streamServer(t, stream.Limits{MaxBatchSamples: 50})
	out, _, err := runStream("--addr", addr, "--pace", "0", "--demo")
	if err == nil || !strings.Contains(err.Error(), "InvalidArgument") || !strings.Contains(err.Error(), "batch.tracks") {
		t.Errorf("error %v, want the server's INVALID_ARGUMENT on batch.tracks\n%s", err, out)
	}
}

// TestRunStreamErrors: bad flags are usage errors; a bad file, an absent
// server or CA file are plain errors.
func TestRunStreamErrors(t *testing.T) {
	l, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	closed := l.Addr().String()
	l.Close()
	bad := filepath.Join(t.TempDir(), "bad.csv")
	os.WriteFile(bad, []byte("time_s,segment,qw,qx,qy,qz\n0,pelvis,1,0,0,0\n-1,pelvis,1,0,0,0\n"), 0o644)
	cases := []struct {
		args  []string
		usage bool
		want  string
	}{
		{[]string{"--demo", "--pace", "-1"}, true, "--pace"},
		{[]string{"--demo", "--batch-ms", "0"}, true, "--batch-ms"},
		{[]string{"--demo", "--addr", ""}, true, "--addr"},
		{[]string{}, true, "no capture given"},
		{[]string{"--demo", "--speed", "sideways"}, true, "--speed"},
		{[]string{bad}, false, "bad.csv"},
		{[]string{"--demo", "--addr", closed, "--pace", "0"}, false, closed},
		{[]string{"--demo", "--ca", filepath.Join(t.TempDir(), "none.pem")}, false, "--ca"},
	}
	for _, c := range cases {
		_, _, err := runStream(c.args...)
		if err == nil || !strings.Contains(err.Error(), c.want) || isUsage(err) != c.usage {
			t.Errorf("%v: error %v (usage %v), want one naming %q (usage %v)", c.args, err, isUsage(err), c.want, c.usage)
		}
	}
}

// TestRunStreamToken: against a server that requires bearer tokens, the
// client is refused without --token (Unauthenticated) and served with it.
func TestRunStreamToken(t *testing.T) {
	const token = "s3cret-token-for-the-stream-test"
	dir := t.TempDir()
	file := filepath.Join(dir, "tokens")
	if err := os.WriteFile(file, []byte(server.HashToken(token)+" streamtest\n"), 0o600); err != nil {
		t.Fatal(err)
	}
	addr := streamServerWith(t, stream.Limits{}, func(c *server.Config) { c.TokenFile = file })

	t.Setenv("KINCHAIN_TOKEN", "")
	if _, _, err := runStream("--addr", addr, "--pace", "0", "--demo"); err == nil || !strings.Contains(err.Error(), "Unauthenticated") {
		t.Errorf("without a token: %v, want Unauthenticated", err)
	}
	if _, _, err := runStream("--addr", addr, "--pace", "0", "--token", "wrong", "--demo"); err == nil || !strings.Contains(err.Error(), "Unauthenticated") {
		t.Errorf("with a wrong token: %v, want Unauthenticated", err)
	}
	out, _, err := runStream("--addr", addr, "--pace", "0", "--token", token, "--demo")
	if err != nil || !strings.Contains(out, "impact") {
		t.Errorf("with the token: %v\n%s", err, out)
	}
	if _, _, err := runStream("--addr", addr, "--cert", "x.pem", "--demo"); err == nil || !strings.Contains(err.Error(), "--cert and --key") {
		t.Errorf("--cert without --key: %v", err)
	}
}
