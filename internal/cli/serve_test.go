package cli

import (
	"bufio"
	"context"
	"encoding/json"
	"io"
	"log/slog"
	"net/http"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/kinchain/kinchain/internal/server"
)

func env(m map[string]string) func(string) (string, bool) {
	return func(k string) (string, bool) {
		v, ok := m[k]
		return v, ok
	}
}

func TestParseServeDefaults(t *testing.T) {
	f, err := parseServe(nil, env(nil), io.Discard)
	if err != nil {
		t.Fatal(err)
	}
	// The fixed defaults.
	if f.cfg.GRPCAddr != "127.0.0.1:7310" || f.cfg.HTTPAddr != "127.0.0.1:7311" || f.cfg.MetricsAddr != "127.0.0.1:7312" {
		t.Errorf("addresses = %s %s %s", f.cfg.GRPCAddr, f.cfg.HTTPAddr, f.cfg.MetricsAddr)
	}
	if d := server.DefaultConfig(); f.cfg.LogValue().String() != d.LogValue().String() {
		t.Errorf("no-flag config\n%v\nis not DefaultConfig\n%v", f.cfg.LogValue(), d.LogValue())
	}
	if !f.cfg.Reflection || f.logLevel != slog.LevelInfo {
		t.Errorf("reflection %v, log level %v; want on, info", f.cfg.Reflection, f.logLevel)
	}
}

func TestParseServeEnvAndFlags(t *testing.T) {
	e := env(map[string]string{
		"KINCHAIN_GRPC_ADDR":           "127.0.0.1:9000",
		"KINCHAIN_HTTP_ADDR":           "127.0.0.1:9001",
		"KINCHAIN_MAX_RECV_BYTES":      "8MiB",
		"KINCHAIN_REFLECTION":          "false",
		"KINCHAIN_LOG_LEVEL":           "debug",
		"KINCHAIN_STREAM_IDLE_TIMEOUT": "5s",
		"KINCHAIN_MAX_REQUESTS":        "3",
	})
	f, err := parseServe([]string{"-grpc-addr", ":7400", "--max-streams=9", "-shutdown-grace", "3s"}, e, io.Discard)
	if err != nil {
		t.Fatal(err)
	}
	c := f.cfg
	if c.GRPCAddr != ":7400" {
		t.Errorf("grpc addr %q: the flag must win over the environment", c.GRPCAddr)
	}
	if c.HTTPAddr != "127.0.0.1:9001" || c.MaxRecvMsgBytes != 8<<20 || c.Reflection || f.logLevel != slog.LevelDebug ||
		c.StreamIdleTimeout != 5*time.Second || c.MaxConcurrentRequests != 3 {
		t.Errorf("environment not applied: %v level %v", c.LogValue(), f.logLevel)
	}
	if c.MaxConcurrentStreams != 9 || c.ShutdownGrace != 3*time.Second {
		t.Errorf("flags not applied: %v", c.LogValue())
	}
}

func TestParseServeErrors(t *testing.T) {
	cases := []struct {
		args []string
		env  map[string]string
		want string
	}{
		{[]string{"-max-recv-bytes", "lots"}, nil, "max-recv-bytes"},
		{[]string{"-log-level", "loud"}, nil, "log-level"},
		{[]string{"extra"}, nil, "positional"},
		{nil, map[string]string{"KINCHAIN_REQUEST_TIMEOUT": "soon"}, "KINCHAIN_REQUEST_TIMEOUT"},
		{[]string{"-max-requests", "0"}, nil, "MaxConcurrentRequests"},
		{[]string{"-tls-cert", "c.pem"}, nil, "TLSKeyFile"},
	}
	for _, c := range cases {
		_, err := parseServe(c.args, env(c.env), io.Discard)
		if err == nil || !isUsage(err) || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%v %v: %v, want a usage error naming %s", c.args, c.env, err, c.want)
		}
	}
}

func TestByteSize(t *testing.T) {
	for in, want := range map[string]int{"64MiB": 64 << 20, "512KiB": 512 << 10, "1GiB": 1 << 30, "1000": 1000, "2M": 2 << 20, "10B": 10} {
		var b byteSize
		if err := b.Set(in); err != nil || int(b) != want {
			t.Errorf("Set(%q) = %d, %v; want %d", in, b, err, want)
		}
	}
	for _, in := range []string{"", "-1", "0", "3GiB", "x MiB", "1.5MiB"} {
		var b byteSize
		if err := b.Set(in); err == nil {
			t.Errorf("Set(%q) accepted", in)
		}
	}
	if b := byteSize(64 << 20); b.String() != "64MiB" {
		t.Errorf("String = %s", b.String())
	}
}

// lockedWriter is a goroutine-safe sink for the server's log.
type lockedWriter struct {
	mu sync.Mutex
	b  strings.Builder
}

func (w *lockedWriter) Write(p []byte) (int, error) {
	w.mu.Lock()
	defer w.mu.Unlock()
	return w.b.Write(p)
}

func (w *lockedWriter) String() string {
	w.mu.Lock()
	defer w.mu.Unlock()
	return w.b.String()
}

// TestRunServe starts the real command on loopback ports chosen by the OS,
// checks the start-up line and the probes, and stops it through its
// context.
func TestRunServe(t *testing.T) {
	var logs lockedWriter
	ctx, cancel := context.WithCancel(context.Background())
	defer cancel()
	started := make(chan *server.Server, 1)
	done := make(chan error, 1)
	go func() {
		done <- runServe(ctx, []string{"-grpc-addr", "127.0.0.1:0", "-http-addr", "127.0.0.1:0", "-metrics-addr", "127.0.0.1:0"},
			env(map[string]string{"KINCHAIN_SHUTDOWN_GRACE": "2s"}), &logs, func(s *server.Server) { started <- s })
	}()
	var srv *server.Server
	select {
	case srv = <-started:
	case err := <-done:
		t.Fatalf("runServe: %v", err)
	}
	var ok bool
	for i := 0; i < 100 && !ok; i++ { // Serve marks itself ready just after starting
		resp, err := http.Get("http://" + srv.Addrs().HTTP + "/readyz")
		if err == nil {
			ok = resp.StatusCode == 200
			resp.Body.Close()
		}
		if !ok {
			time.Sleep(10 * time.Millisecond)
		}
	}
	if !ok {
		t.Errorf("/readyz never answered 200")
	}
	cancel()
	if err := <-done; err != nil {
		t.Errorf("runServe: %v", err)
	}

	// The first line is the effective configuration, one JSON object.
	sc := bufio.NewScanner(strings.NewReader(logs.String()))
	if !sc.Scan() {
		t.Fatal("no log output")
	}
	var first struct {
		Msg    string            `json:"msg"`
		Config map[string]any    `json:"config"`
		Bound  map[string]string `json:"bound"`
	}
	if err := json.Unmarshal(sc.Bytes(), &first); err != nil {
		t.Fatalf("first log line is not JSON: %v\n%s", err, sc.Text())
	}
	if first.Config["grpc_addr"] != "127.0.0.1:0" || first.Config["shutdown_grace"] != "2s" || first.Bound["grpc"] != srv.Addrs().GRPC {
		t.Errorf("start-up line = %s", sc.Text())
	}
	if strings.Contains(logs.String(), `"level":"ERROR"`) {
		t.Errorf("errors logged:\n%s", logs.String())
	}
}
