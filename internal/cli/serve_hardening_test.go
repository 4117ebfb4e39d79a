package cli

import (
	"bytes"
	"context"
	"io"
	"strings"
	"sync"
	"syscall"
	"testing"
	"time"

	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/credentials/insecure"
	"google.golang.org/grpc/status"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/server"
	"github.com/kinchain/kinchain/internal/synth"
)

func TestParseServeHardeningFlags(t *testing.T) {
	f, err := parseServe([]string{"-tls-cert", "c.pem", "-tls-key", "k.pem", "-tls-client-ca", "ca.pem", "-token-file", "tokens", "-health-addr", "127.0.0.1:7313"},
		env(map[string]string{"KINCHAIN_PRODUCTION": "true"}), io.Discard)
	if err != nil {
		t.Fatal(err)
	}
	c := f.cfg
	if !c.Production || c.Reflection || c.TLSClientCAFile != "ca.pem" || c.TokenFile != "tokens" || c.HealthAddr != "127.0.0.1:7313" {
		t.Errorf("config %v: want production, reflection off, client CA, token file, health address", c.LogValue())
	}
	// Production: TLS required; reflection asked for explicitly is refused.
	for _, tc := range []struct {
		args []string
		env  map[string]string
		want string
	}{
		{[]string{"-production"}, nil, "needs TLS"},
		{[]string{"-production", "-tls-cert", "c", "-tls-key", "k", "-reflection"}, nil, "Reflection must be off"},
		{[]string{"-production", "-tls-cert", "c", "-tls-key", "k"}, map[string]string{"KINCHAIN_REFLECTION": "true"}, "Reflection must be off"},
		{[]string{"-tls-client-ca", "ca.pem"}, nil, "TLSClientCAFile"},
	} {
		if _, err := parseServe(tc.args, env(tc.env), io.Discard); err == nil || !strings.Contains(err.Error(), tc.want) {
			t.Errorf("%v %v: %v, want an error naming %q", tc.args, tc.env, err, tc.want)
		}
	}
}

func TestHashToken(t *testing.T) {
	var out bytes.Buffer
	// sha256("alpha"), as `printf %s alpha | sha256sum` prints it.
	const want = "8ed3f6ad685b959ead7022518e1af76cd816f8e8ec7ccdda1ed4018e8f2223f8\n"
	for _, in := range []string{"alpha", "alpha\n", "alpha\r\n"} {
		out.Reset()
		if err := hashToken(strings.NewReader(in), &out); err != nil || out.String() != want {
			t.Errorf("hashToken(%q) = %q, %v", in, out.String(), err)
		}
	}
	if err := hashToken(strings.NewReader("\n"), &out); err == nil {
		t.Errorf("an empty token was hashed")
	}
	if !hashTokenRequested([]string{"-hash-token"}) || hashTokenRequested([]string{"-grpc-addr", ":1"}) {
		t.Errorf("hashTokenRequested")
	}
}

// TestServeSIGTERMUnderLoad runs the real serve command (runServe, the
// same code as `kinchain serve`), puts it under gRPC load with the real
// engine, and sends the process SIGTERM: calls in flight complete OK
// (none is cut off within the grace period), calls after the signal are
// refused with UNAVAILABLE, and the command returns nil.
func TestServeSIGTERMUnderLoad(t *testing.T) {
	if testing.Short() {
		t.Skip("signals the test process; -short skips it")
	}
	c, _, err := synth.Generate(synth.Config{Rate: 1000, Duration: 3, LeadIn: 0.5, Tail: 0.3})
	if err != nil {
		t.Fatal(err)
	}
	req := &kinchainv1.AnalyzeCaptureRequest{Capture: c}
	var logs lockedWriter
	started := make(chan *server.Server, 1)
	done := make(chan error, 1)
	go func() {
		done <- runServe(context.Background(), []string{"-grpc-addr", "127.0.0.1:0", "-http-addr", "", "-metrics-addr", "", "-shutdown-grace", "20s"},
			env(nil), &logs, func(s *server.Server) { started <- s })
	}()
	var srv *server.Server
	select {
	case srv = <-started:
	case err := <-done:
		t.Fatalf("runServe: %v", err)
	}
	cc, err := grpc.NewClient(srv.Addrs().GRPC, grpc.WithTransportCredentials(insecure.NewCredentials()))
	if err != nil {
		t.Fatal(err)
	}
	defer cc.Close()
	client := kinchainv1.NewKinematicsServiceClient(cc)
	// Wait until it serves.
	for i := 0; i < 200; i++ {
		if _, err := client.AnalyzeCapture(context.Background(), req); err == nil {
			break
		}
		time.Sleep(10 * time.Millisecond)
	}

	var mu sync.Mutex
	outcomes := map[codes.Code]int{}
	stop := make(chan struct{})
	var wg sync.WaitGroup
	for i := 0; i < 4; i++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for k := 0; k < 500; k++ {
				select {
				case <-stop:
					return
				default:
				}
				_, err := client.AnalyzeCapture(context.Background(), req)
				mu.Lock()
				outcomes[status.Code(err)]++
				mu.Unlock()
			}
		}()
	}
	time.Sleep(300 * time.Millisecond)
	if err := syscall.Kill(syscall.Getpid(), syscall.SIGTERM); err != nil {
		t.Fatal(err)
	}
	select {
	case err := <-done:
		if err != nil {
			t.Errorf("runServe after SIGTERM: %v", err)
		}
	case <-time.After(30 * time.Second):
		t.Fatal("serve did not stop within 30 s of SIGTERM")
	}
	close(stop)
	wg.Wait()
	t.Logf("outcomes: %v", outcomes)
	for code, n := range outcomes {
		if code != codes.OK && code != codes.Unavailable {
			t.Errorf("%d calls ended %v: cut off by the shutdown", n, code)
		}
	}
	if outcomes[codes.OK] == 0 || outcomes[codes.Unavailable] == 0 {
		t.Errorf("outcomes %v: want completed calls and calls refused after the signal", outcomes)
	}
	l := logs.String()
	if !strings.Contains(l, `"msg":"draining"`) || !strings.Contains(l, `"forced":false`) {
		t.Errorf("no clean drain in the log:\n%s", l)
	}
}
