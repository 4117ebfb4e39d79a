package deploy

import (
	"context"
	"debug/elf"
	"encoding/json"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"runtime"
	"strconv"
	"strings"
	"syscall"
	"testing"
	"time"

	healthpb "google.golang.org/grpc/health/grpc_health_v1"

	"github.com/kinchain/kinchain/api/client"
	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/synth"
)

// The image itself can only be built where a container engine runs; these
// tests check what can be checked without one: the Dockerfile's content, and
// the binary its own build command produces.

func readRepoDockerfile(t testing.TB) *dockerfile {
	t.Helper()
	d, err := parseDockerfile(filepath.Join(repoRoot(t), "deploy", "Dockerfile"))
	if err != nil {
		t.Fatal(err)
	}
	return d
}

// imageUser returns the final stage's numeric USER uid:gid.
func imageUser(t testing.TB, d *dockerfile) (uid, gid int64) {
	t.Helper()
	users := d.final().all("USER")
	if len(users) != 1 {
		t.Fatalf("final stage: %d USER instructions, want 1", len(users))
	}
	m := regexp.MustCompile(`^(\d+):(\d+)$`).FindStringSubmatch(users[0].Args)
	if m == nil {
		t.Fatalf("USER %q: want numeric uid:gid (Kubernetes' runAsNonRoot can only verify a numeric user)", users[0].Args)
	}
	uid, _ = strconv.ParseInt(m[1], 10, 64)
	gid, _ = strconv.ParseInt(m[2], 10, 64)
	return uid, gid
}

func TestDockerfileShape(t *testing.T) {
	d := readRepoDockerfile(t)
	if d.stage("build") == nil {
		t.Fatal("no build stage")
	}
	f := d.final()
	// Nothing but the binary in the image: an empty base, one COPY from the
	// build stage, exec-form entry point (no shell to run a shell form).
	if f.Base != "scratch" {
		t.Errorf("final stage FROM %s, want scratch (no shell, no libc)", f.Base)
	}
	for _, in := range f.Instrs {
		switch in.Cmd {
		case "RUN":
			t.Errorf("line %d: RUN in the final stage (there is no shell there)", in.Line)
		case "COPY":
			if in.Args != "--from=build "+dockerOut+" /kinchain" {
				t.Errorf("line %d: COPY %s; the final stage holds only the binary, copied from the build stage", in.Line, in.Args)
			}
		case "ENTRYPOINT", "CMD":
			var v []string
			if err := json.Unmarshal([]byte(in.Args), &v); err != nil {
				t.Errorf("line %d: %s %s is not exec form (JSON array): %v", in.Line, in.Cmd, in.Args, err)
			}
			if in.Cmd == "ENTRYPOINT" && (len(v) != 1 || v[0] != "/kinchain") {
				t.Errorf("ENTRYPOINT %v, want [/kinchain]", v)
			}
		}
	}
	if uid, _ := imageUser(t, d); uid == 0 {
		t.Error("USER is root")
	}
	// The build is static and stamps internal/version.
	s := d.stage("build")
	env, err := stageEnv(s, d.argDefaults(s))
	if err != nil {
		t.Fatal(err)
	}
	if env["CGO_ENABLED"] != "0" {
		t.Errorf("build stage CGO_ENABLED=%q, want 0", env["CGO_ENABLED"])
	}
	if env["GOTOOLCHAIN"] != "local" {
		t.Errorf("build stage GOTOOLCHAIN=%q, want local (never download a toolchain)", env["GOTOOLCHAIN"])
	}
	cmd, err := goBuildRun(s)
	if err != nil {
		t.Fatal(err)
	}
	for _, v := range []string{"Version=${VERSION}", "Commit=${COMMIT}"} {
		if !strings.Contains(cmd, "-X github.com/kinchain/kinchain/internal/version."+v) {
			t.Errorf("go build does not stamp internal/version.%s: %s", v, cmd)
		}
	}
	// The Go of the build image is the Go the module asks for (go.mod's go
	// directive, major.minor).
	gomod, err := os.ReadFile(filepath.Join(repoRoot(t), "go.mod"))
	if err != nil {
		t.Fatal(err)
	}
	m := regexp.MustCompile(`(?m)^go (\d+\.\d+)`).FindSubmatch(gomod)
	if m == nil {
		t.Fatal("go.mod has no go directive")
	}
	if gv := d.GlobalArgs["GO_VERSION"]; gv != string(m[1]) && !strings.HasPrefix(gv, string(m[1])+".") {
		t.Errorf("ARG GO_VERSION=%s, go.mod says go %s", gv, m[1])
	}
	if s.Base != "golang:${GO_VERSION}" {
		t.Errorf("build stage FROM %s, want golang:${GO_VERSION}", s.Base)
	}
}

// TestStaticBinary checks that the Dockerfile's build yields a statically
// linked ELF executable: no program interpreter (PT_INTERP), no dynamic
// section, no shared libraries — what a scratch image can run.
func TestStaticBinary(t *testing.T) {
	bin := kinchainBinary(t)
	f, err := elf.Open(bin)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	for _, p := range f.Progs {
		if p.Type == elf.PT_INTERP {
			t.Error("the binary has a PT_INTERP program header: it is dynamically linked")
		}
		if p.Type == elf.PT_DYNAMIC {
			t.Error("the binary has a PT_DYNAMIC program header")
		}
	}
	if s := f.Section(".dynamic"); s != nil {
		t.Error("the binary has a .dynamic section")
	}
	if libs, err := f.ImportedLibraries(); err == nil && len(libs) > 0 {
		t.Errorf("the binary imports shared libraries %v", libs)
	}
	if f.Type != elf.ET_EXEC {
		t.Errorf("ELF type %v, want ET_EXEC (a position-dependent static executable)", f.Type)
	}
	want := map[string]elf.Machine{"amd64": elf.EM_X86_64, "arm64": elf.EM_AARCH64}[runtime.GOARCH]
	if want != 0 && f.Machine != want {
		t.Errorf("ELF machine %v, want %v", f.Machine, want)
	}
}

func TestVersionStamped(t *testing.T) {
	out, err := exec.Command(kinchainBinary(t), "version").CombinedOutput()
	if err != nil {
		t.Fatalf("kinchain version: %v\n%s", err, out)
	}
	for _, w := range []string{testVersion, testCommit} {
		if !strings.Contains(string(out), w) {
			t.Errorf("kinchain version printed %q, want it to show %s", out, w)
		}
	}
}

// imageEnv is the environment the container gets: the image's ENV, then
// the Deployment's (env from the ConfigMap and env entries), as the kubelet
// composes it. Addresses are replaced by loopback ones with port 0, as
// flags (which win over the environment), so that the test server is
// reachable only from this machine.
func imageEnv(t *testing.T, d *dockerfile, podEnv map[string]string) []string {
	t.Helper()
	env, err := stageEnv(d.final(), d.argDefaults(d.final()))
	if err != nil {
		t.Fatal(err)
	}
	for k, v := range podEnv {
		env[k] = v
	}
	var out []string
	for k, v := range env {
		out = append(out, k+"="+v)
	}
	return out
}

// loopbackArgs are the serve flags that override the listen addresses.
var loopbackArgs = []string{"-grpc-addr", "127.0.0.1:0", "-http-addr", "127.0.0.1:0", "-metrics-addr", "127.0.0.1:0", "-health-addr", "127.0.0.1:0"}

// procUID reads the real uid of a running process.
func procUID(pid int) (int, error) {
	b, err := os.ReadFile("/proc/" + strconv.Itoa(pid) + "/status")
	if err != nil {
		return 0, err
	}
	m := regexp.MustCompile(`(?m)^Uid:\s+(\d+)`).FindSubmatch(b)
	if m == nil {
		return 0, os.ErrNotExist
	}
	return strconv.Atoi(string(m[1]))
}

// TestBinaryRunsUnprivileged runs the Dockerfile's binary the way the pod
// does, as far as this machine allows: as the image's numeric user (when the
// test runs as root; otherwise as the current user), with a read-only
// working directory and no environment but the image's and the base
// Deployment's. It must answer its HTTP probes and the gRPC health service,
// analyse a capture, then on SIGTERM report not-ready (while staying
// alive) for the configured shutdown delay, and exit 0 within the pod's
// termination grace period less the preStop delay.
func TestBinaryRunsUnprivileged(t *testing.T) {
	if testing.Short() {
		t.Skip("builds and runs the binary")
	}
	t.Parallel()
	d := readRepoDockerfile(t)
	uid, gid := imageUser(t, d)
	base := buildKustomization(t, "base")
	dep := deploymentOf(t, base)
	ctr := serverContainer(t, dep)
	podEnv := containerEnv(t, base, ctr)
	timing := drainTiming(t, dep, podEnv)

	ro := filepath.Join(scratchDir, "readonly-cwd")
	if err := os.MkdirAll(ro, 0o755); err != nil {
		t.Fatal(err)
	}
	if err := os.Chmod(ro, 0o555); err != nil {
		t.Fatal(err)
	}
	o := serveOpts{args: loopbackArgs, env: imageEnv(t, d, podEnv), dir: ro}
	wantUID := os.Geteuid()
	if os.Geteuid() == 0 {
		o.cred = &syscall.Credential{Uid: uint32(uid), Gid: uint32(gid)}
		wantUID = int(uid)
	} else {
		t.Logf("not root: running as uid %d instead of the image's %d", os.Geteuid(), uid)
	}
	p := startServe(t, kinchainBinary(t), o)
	if got, err := procUID(p.cmd.Process.Pid); err != nil || got != wantUID {
		t.Errorf("server runs as uid %d (%v), want %d", got, err, wantUID)
	}

	for _, addr := range []string{p.bound.HTTP, p.bound.Health} {
		for _, path := range []string{"/healthz", "/readyz"} {
			if code, b, err := httpGet("http://" + addr + path); err != nil || code != 200 {
				t.Errorf("GET %s%s: %d %s %v", addr, path, code, b, err)
			}
		}
	}
	for _, svc := range []string{"", kinchainv1.KinematicsService_ServiceDesc.ServiceName} {
		if st, err := grpcHealth(p.bound.GRPC, svc, false); err != nil || st != healthpb.HealthCheckResponse_SERVING {
			t.Errorf("gRPC health %q: %v %v", svc, st, err)
		}
	}
	c, _, err := synth.Generate(synth.Config{})
	if err != nil {
		t.Fatal(err)
	}
	cl, err := client.New("passthrough:///"+p.bound.GRPC, client.Options{})
	if err != nil {
		t.Fatal(err)
	}
	defer cl.Close()
	ctx, cancel := context.WithTimeout(context.Background(), 30*time.Second)
	defer cancel()
	resp, err := cl.Analyze(ctx, c, nil)
	if err != nil {
		t.Fatalf("AnalyzeCapture as uid %d in a read-only directory: %v\n%s", wantUID, err, p.logText())
	}
	if len(resp.GetSwings()) != 1 {
		t.Errorf("the one-swing model capture gave %d swings", len(resp.GetSwings()))
	}
	if code, b, _ := httpGet("http://" + p.bound.Metrics + "/metrics"); code != 200 ||
		!regexp.MustCompile(`kinchain_build_info\{[^}]*commit="`+testCommit+`"[^}]*version="`+testVersion+`"[^}]*\} 1`).Match(b) {
		t.Errorf("/metrics: %d; kinchain_build_info does not carry the stamped version and commit", code)
	}

	// Drain: not ready but alive during the shutdown delay, then a clean exit.
	start := time.Now()
	if err := p.cmd.Process.Signal(syscall.SIGTERM); err != nil {
		t.Fatal(err)
	}
	if timing.delay > 0 {
		if !waitFor(timing.delay/2, func() bool {
			code, _, _ := httpGet("http://" + p.bound.Health + "/readyz")
			return code == 503
		}) {
			t.Errorf("/readyz did not turn 503 after SIGTERM")
		}
		if code, _, err := httpGet("http://" + p.bound.Health + "/healthz"); code != 200 {
			t.Errorf("/healthz during the shutdown delay: %d %v (liveness must hold while draining)", code, err)
		}
		if st, err := grpcHealth(p.bound.GRPC, kinchainv1.KinematicsService_ServiceDesc.ServiceName, false); err != nil || st != healthpb.HealthCheckResponse_NOT_SERVING {
			t.Errorf("gRPC health during the shutdown delay: %v %v, want NOT_SERVING", st, err)
		}
	}
	limit := timing.termination - timing.preStop
	select {
	case <-p.exited:
	case <-time.After(limit):
		t.Fatalf("still running %v after SIGTERM (termination grace %v − preStop %v)\n%s", limit, timing.termination, timing.preStop, p.logText())
	}
	took := time.Since(start)
	if p.err != nil {
		t.Errorf("exit after SIGTERM: %v, want status 0\n%s", p.err, p.logText())
	}
	if took < timing.delay {
		t.Errorf("exited %v after SIGTERM, before the shutdown delay of %v", took, timing.delay)
	}
	if !strings.Contains(p.logText(), `"msg":"stopped"`) {
		t.Errorf("no \"stopped\" log line\n%s", p.logText())
	}
}
