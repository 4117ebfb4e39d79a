package deploy

import (
	"bufio"
	"bytes"
	"context"
	"crypto/tls"
	"encoding/json"
	"fmt"
	"io"
	"net/http"
	"os"
	"os/exec"
	"path/filepath"
	"sync"
	"syscall"
	"testing"
	"time"

	"google.golang.org/grpc"
	"google.golang.org/grpc/credentials"
	"google.golang.org/grpc/credentials/insecure"
	healthpb "google.golang.org/grpc/health/grpc_health_v1"
)

// scratchDir is a world-readable temporary directory for files a process
// running as another user (the image's uid) must reach: the built binary,
// TLS files. t.TempDir is 0700 and owned by the test's user.
var scratchDir string

func TestMain(m *testing.M) {
	d, err := os.MkdirTemp("", "kinchain-deploy-")
	if err == nil {
		err = os.Chmod(d, 0o755)
	}
	if err != nil {
		fmt.Fprintln(os.Stderr, "deploy tests:", err)
		os.Exit(1)
	}
	scratchDir = d
	code := m.Run()
	_ = os.RemoveAll(d)
	os.Exit(code)
}

// repoRoot is the service's repository root: the parent of this module.
func repoRoot(tb testing.TB) string {
	tb.Helper()
	root, err := filepath.Abs("..")
	if err != nil {
		tb.Fatal(err)
	}
	b, err := os.ReadFile(filepath.Join(root, "go.mod"))
	if err != nil || !bytes.Contains(b, []byte("module github.com/kinchain/kinchain\n")) {
		tb.Fatalf("%s is not the kinchain repository root (go.mod: %v)", root, err)
	}
	return root
}

// The build metadata the tests stamp into the binary through the
// Dockerfile's build arguments.
const (
	testVersion = "v0.0.0-deploycheck"
	testCommit  = "0123456789ab"
)

var (
	binOnce sync.Once
	binPath string
	binErr  error
)

// kinchainBinary builds cmd/kinchain once per test run with the
// Dockerfile's own go build command (see buildWithDockerfile) and returns
// the binary's path (world-executable).
func kinchainBinary(tb testing.TB) string {
	tb.Helper()
	binOnce.Do(func() {
		binPath, binErr = buildWithDockerfile(repoRoot(tb), filepath.Join(scratchDir, "bin"))
	})
	if binErr != nil {
		tb.Fatalf("building kinchain with the Dockerfile's command: %v", binErr)
	}
	return binPath
}

// serveProc is a running `kinchain serve`.
type serveProc struct {
	cmd    *exec.Cmd
	bound  boundAddrs
	mu     sync.Mutex
	log    bytes.Buffer
	exited chan struct{}
	err    error // Wait's result, valid once exited is closed
}

// boundAddrs are the listen addresses the server reported in its
// "serving" log line ("" for a listener that is off).
type boundAddrs struct {
	GRPC    string `json:"grpc_addr"`
	HTTP    string `json:"http_addr"`
	Metrics string `json:"metrics_addr"`
	Health  string `json:"health_addr"`
}

// serveOpts configure startServe.
type serveOpts struct {
	args []string // after "serve"
	env  []string // the whole environment of the process
	dir  string   // working directory
	cred *syscall.Credential
}

// startServe starts `bin serve` and waits (at most 30 s) for its "serving"
// log line, which names the bound addresses; the server is ready then. The process is killed at the
// end of the test if it is still running.
func startServe(tb testing.TB, bin string, o serveOpts) *serveProc {
	tb.Helper()
	p := &serveProc{exited: make(chan struct{})}
	p.cmd = exec.Command(bin, append([]string{"serve"}, o.args...)...)
	p.cmd.Env = o.env
	if p.cmd.Env == nil {
		p.cmd.Env = []string{}
	}
	p.cmd.Dir = o.dir
	if o.cred != nil {
		p.cmd.SysProcAttr = &syscall.SysProcAttr{Credential: o.cred}
	}
	stderr, err := p.cmd.StderrPipe()
	if err != nil {
		tb.Fatal(err)
	}
	if err := p.cmd.Start(); err != nil {
		tb.Fatal(err)
	}
	started := make(chan boundAddrs, 1)
	go func() {
		sc := bufio.NewScanner(stderr)
		sc.Buffer(make([]byte, 64<<10), 1<<20)
		sent := false
		for sc.Scan() {
			line := sc.Bytes()
			p.mu.Lock()
			p.log.Write(line)
			p.log.WriteByte('\n')
			p.mu.Unlock()
			if sent {
				continue
			}
			var rec struct {
				Msg string `json:"msg"`
				boundAddrs
			}
			if json.Unmarshal(line, &rec) == nil && rec.Msg == "serving" && rec.GRPC != "" {
				started <- rec.boundAddrs
				sent = true
			}
		}
		p.err = p.cmd.Wait()
		close(p.exited)
	}()
	tb.Cleanup(func() {
		select {
		case <-p.exited:
		default:
			_ = p.cmd.Process.Kill()
			<-p.exited
		}
	})
	select {
	case p.bound = <-started:
	case <-p.exited:
		tb.Fatalf("kinchain serve exited before serving: %v\n%s", p.err, p.logText())
	case <-time.After(30 * time.Second):
		tb.Fatalf("kinchain serve wrote no \"serving\" line within 30 s\n%s", p.logText())
	}
	return p
}

// logText returns what the process logged so far.
func (p *serveProc) logText() string {
	p.mu.Lock()
	defer p.mu.Unlock()
	return p.log.String()
}

// stop sends SIGTERM and waits up to limit for the exit; it returns the
// time the exit took and Wait's error.
func (p *serveProc) stop(tb testing.TB, limit time.Duration) (time.Duration, error) {
	tb.Helper()
	start := time.Now()
	if err := p.cmd.Process.Signal(syscall.SIGTERM); err != nil {
		tb.Fatal(err)
	}
	select {
	case <-p.exited:
		return time.Since(start), p.err
	case <-time.After(limit):
		tb.Fatalf("kinchain serve still running %v after SIGTERM\n%s", limit, p.logText())
		return 0, nil
	}
}

// httpGet fetches url (TLS certificates are not verified, as the kubelet's
// HTTPS probes do not verify them) and returns the status and body.
func httpGet(url string) (int, []byte, error) {
	hc := &http.Client{
		Timeout:   5 * time.Second,
		Transport: &http.Transport{TLSClientConfig: &tls.Config{InsecureSkipVerify: true}},
	}
	defer hc.CloseIdleConnections()
	resp, err := hc.Get(url)
	if err != nil {
		return 0, nil, err
	}
	defer resp.Body.Close()
	b, err := io.ReadAll(io.LimitReader(resp.Body, 16<<20))
	return resp.StatusCode, b, err
}

// grpcHealth asks the gRPC health service of addr about service (""
// for the server as a whole), in plaintext or, with useTLS, over TLS
// without verification.
func grpcHealth(addr, service string, useTLS bool) (healthpb.HealthCheckResponse_ServingStatus, error) {
	creds := insecure.NewCredentials()
	if useTLS {
		creds = credentials.NewTLS(&tls.Config{InsecureSkipVerify: true})
	}
	cc, err := grpc.NewClient("passthrough:///"+addr, grpc.WithTransportCredentials(creds))
	if err != nil {
		return 0, err
	}
	defer cc.Close()
	ctx, cancel := context.WithTimeout(context.Background(), 5*time.Second)
	defer cancel()
	r, err := healthpb.NewHealthClient(cc).Check(ctx, &healthpb.HealthCheckRequest{Service: service})
	if err != nil {
		return 0, err
	}
	return r.GetStatus(), nil
}

// waitFor polls cond every 50 ms until it holds or limit passes.
func waitFor(limit time.Duration, cond func() bool) bool {
	deadline := time.Now().Add(limit)
	for {
		if cond() {
			return true
		}
		if time.Now().After(deadline) {
			return false
		}
		time.Sleep(50 * time.Millisecond)
	}
}
