package deploy

import (
	"bytes"
	"context"
	"crypto/ecdsa"
	"crypto/elliptic"
	"crypto/rand"
	"crypto/tls"
	"crypto/x509"
	"crypto/x509/pkix"
	"encoding/json"
	"encoding/pem"
	"errors"
	"fmt"
	"io"
	"math/big"
	"net"
	"os"
	"path/filepath"
	"regexp"
	"sort"
	"strconv"
	"strings"
	"syscall"
	"testing"
	"time"

	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/credentials"
	"google.golang.org/grpc/credentials/insecure"
	healthpb "google.golang.org/grpc/health/grpc_health_v1"
	rpb "google.golang.org/grpc/reflection/grpc_reflection_v1"
	"google.golang.org/grpc/status"
	appsv1 "k8s.io/api/apps/v1"
	autoscalingv2 "k8s.io/api/autoscaling/v2"
	corev1 "k8s.io/api/core/v1"
	networkingv1 "k8s.io/api/networking/v1"
	"k8s.io/apimachinery/pkg/api/resource"
	"k8s.io/apimachinery/pkg/util/intstr"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/cli"
	"github.com/kinchain/kinchain/internal/server"
)

// Cross-checks between the manifests and the server's code: the values
// come from the server's packages (defaults, flags) or from the running
// binary (its logged effective configuration, its answers), never from
// copies in this file.

// serveFlagNames returns the flags of `kinchain serve`, from its own usage
// text (internal/cli, in-process).
func serveFlagNames(t testing.TB) map[string]bool {
	t.Helper()
	var out bytes.Buffer
	err := cli.RunServe(context.Background(), []string{"-h"}, io.Discard, &out)
	if err == nil {
		t.Fatal("serve -h did not stop at the usage text")
	}
	names := map[string]bool{}
	for _, m := range regexp.MustCompile(`(?m)^\s+-([a-z0-9-]+)`).FindAllStringSubmatch(out.String(), -1) {
		names[m[1]] = true
	}
	if !names["grpc-addr"] || !names["shutdown-grace"] {
		t.Fatalf("could not read the serve flags from its usage:\n%s", out.String())
	}
	return names
}

// envForFlag is the environment variable of a serve flag, by the rule the
// usage text states: KINCHAIN_ + the flag name upper-cased, '-' as '_'.
func envForFlag(flag string) string {
	return "KINCHAIN_" + strings.ToUpper(strings.ReplaceAll(flag, "-", "_"))
}

// goRuntimeEnv are environment variables read by the Go runtime, not by
// kinchain's flags.
var goRuntimeEnv = map[string]bool{"GOMEMLIMIT": true, "GOMAXPROCS": true, "GOGC": true, "GODEBUG": true}

// TestEnvNamesAreServeFlags: every variable the ConfigMaps, the containers
// and the image set is one the server reads (an unknown KINCHAIN_ variable
// would be ignored silently) or one of the Go runtime's; the usage text
// states the variable rule.
func TestEnvNamesAreServeFlags(t *testing.T) {
	flags := serveFlagNames(t)
	known := map[string]bool{}
	for f := range flags {
		known[envForFlag(f)] = true
	}
	var out bytes.Buffer
	_ = cli.RunServe(context.Background(), []string{"-h"}, io.Discard, &out)
	if !strings.Contains(out.String(), "KINCHAIN_GRPC_ADDR") {
		t.Errorf("serve usage no longer documents the KINCHAIN_<FLAG> rule:\n%s", out.String())
	}
	check := func(where, k string) {
		if !known[k] && !goRuntimeEnv[k] {
			t.Errorf("%s sets %s, which is neither a serve flag's variable nor a Go runtime variable", where, k)
		}
	}
	for _, dir := range []string{"base", "overlays/dev", "overlays/production"} {
		b := buildKustomization(t, dir)
		for k := range containerEnv(t, b, serverContainer(t, deploymentOf(t, b))) {
			check(dir, k)
		}
	}
	d := readRepoDockerfile(t)
	fenv, err := stageEnv(d.final(), nil)
	if err != nil {
		t.Fatal(err)
	}
	for k := range fenv {
		check("the image", k)
	}
}

// portOf returns the port of a listen address.
func portOf(t testing.TB, addr string) int32 {
	t.Helper()
	_, p, err := net.SplitHostPort(addr)
	if err != nil {
		t.Fatalf("address %q: %v", addr, err)
	}
	n, err := strconv.Atoi(p)
	if err != nil {
		t.Fatalf("address %q: port %v", addr, err)
	}
	return int32(n)
}

// listenAddrs maps container port names to the server's address flag.
var listenAddrs = map[string]string{"grpc": "grpc-addr", "http": "http-addr", "metrics": "metrics-addr", "health": "health-addr"}

// servedPorts are the container ports clients and Prometheus reach (through
// Services and the NetworkPolicy); the health port is the kubelet's alone.
var servedPorts = map[string]bool{"grpc": true, "http": true, "metrics": true}

// TestPortsAgree: the container listens on every interface on the ports
// the pod declares, which are the server's documented default ports (the
// health listener has none: it is off by default); the Services, probes,
// NetworkPolicy and image agree with them. Probes use the plain health
// port, which needs no TLS, client certificate or token.
func TestPortsAgree(t *testing.T) {
	defaults := map[string]string{"grpc": server.DefaultGRPCAddr, "http": server.DefaultHTTPAddr, "metrics": server.DefaultMetricsAddr}
	d := readRepoDockerfile(t)
	imgEnv, err := stageEnv(d.final(), nil)
	if err != nil {
		t.Fatal(err)
	}
	var exposed []string
	for _, in := range d.final().all("EXPOSE") {
		exposed = append(exposed, strings.Fields(in.Args)...)
	}
	sort.Strings(exposed)

	for _, dir := range []string{"base", "overlays/dev", "overlays/production"} {
		b := buildKustomization(t, dir)
		dep := deploymentOf(t, b)
		c := serverContainer(t, dep)
		env := containerEnv(t, b, c)
		ports := map[string]int32{}
		var cports []string
		for _, p := range c.Ports {
			ports[p.Name] = p.ContainerPort
			cports = append(cports, strconv.Itoa(int(p.ContainerPort)))
			if p.Protocol != corev1.ProtocolTCP {
				t.Errorf("%s: port %s protocol %s", dir, p.Name, p.Protocol)
			}
		}
		sort.Strings(cports)
		if len(ports) != len(listenAddrs) {
			t.Fatalf("%s: container ports %v, want grpc, http, metrics, health", dir, ports)
		}
		if strings.Join(cports, " ") != strings.Join(exposed, " ") {
			t.Errorf("%s: container ports %v, the image EXPOSEs %v", dir, cports, exposed)
		}
		for name, flag := range listenAddrs {
			key := envForFlag(flag)
			cp, ok := ports[name]
			if !ok {
				t.Errorf("%s: no container port named %s", dir, name)
				continue
			}
			addr, ok := env[key]
			if !ok {
				t.Errorf("%s: %s not set; the server's default %s is loopback-only, unreachable in a pod", dir, key, defaults[name])
				continue
			}
			host, _, _ := net.SplitHostPort(addr)
			if host != "" && host != "0.0.0.0" && host != "::" {
				t.Errorf("%s: %s=%s does not listen on all interfaces", dir, key, addr)
			}
			if got := portOf(t, addr); got != cp {
				t.Errorf("%s: %s=%s, container port %s is %d", dir, key, addr, name, cp)
			}
			if def, ok := defaults[name]; ok && portOf(t, def) != cp {
				t.Errorf("%s: container port %s is %d, the server's default is %s", dir, name, cp, def)
			}
			if iv, ok := imgEnv[key]; !ok || portOf(t, iv) != cp {
				t.Errorf("%s: the image sets %s=%q, the pod's port is %d", dir, key, iv, cp)
			}
		}

		// Services: named ports, by protocol, each mapped to the container
		// port of the same name; the headless one needs port = containerPort.
		for _, s := range all[corev1.Service](b) {
			for _, sp := range s.Spec.Ports {
				cp, ok := ports[sp.Name]
				if !ok || !servedPorts[sp.Name] {
					t.Errorf("%s: Service %s port %s: not a served container port (%v)", dir, s.Name, sp.Name, servedPorts)
					continue
				}
				if sp.TargetPort.Type != intstr.String || sp.TargetPort.StrVal != sp.Name {
					t.Errorf("%s: Service %s port %s: targetPort %v, want the container port name %s", dir, s.Name, sp.Name, sp.TargetPort.String(), sp.Name)
				}
				if sp.Port != cp {
					t.Errorf("%s: Service %s port %s is %d, container port %d (clients use the documented ports)", dir, s.Name, sp.Name, sp.Port, cp)
				}
				if sp.AppProtocol == nil || *sp.AppProtocol == "" {
					t.Errorf("%s: Service %s port %s has no appProtocol", dir, s.Name, sp.Name)
				}
			}
		}

		// Probes name real ports.
		for what, pr := range map[string]*corev1.Probe{"readiness": c.ReadinessProbe, "liveness": c.LivenessProbe} {
			if pr == nil {
				t.Errorf("%s: no %s probe", dir, what)
				continue
			}
			switch {
			case pr.GRPC != nil:
				if pr.GRPC.Port != ports["grpc"] {
					t.Errorf("%s: %s gRPC probe on port %d, the gRPC port is %d", dir, what, pr.GRPC.Port, ports["grpc"])
				}
			case pr.HTTPGet != nil:
				if pr.HTTPGet.Port.String() != "health" {
					t.Errorf("%s: %s probe on port %s, want the health port (plain HTTP whatever the other ports require)", dir, what, pr.HTTPGet.Port.String())
				}
				if pr.HTTPGet.Scheme == corev1.URISchemeHTTPS {
					t.Errorf("%s: %s probe over HTTPS; the health listener is plain HTTP", dir, what)
				}
			default:
				t.Errorf("%s: %s probe is neither gRPC nor HTTP GET", dir, what)
			}
		}

		// NetworkPolicy: exactly the three ports, metrics only from a
		// namespace selector.
		np := one[networkingv1.NetworkPolicy](t, b)
		open := map[string]bool{}
		for _, r := range np.Spec.Ingress {
			for _, p := range r.Ports {
				if p.Port == nil {
					t.Errorf("%s: NetworkPolicy rule without a port opens all ports", dir)
					continue
				}
				name := p.Port.String()
				if !servedPorts[name] {
					t.Errorf("%s: NetworkPolicy opens %s, not a served container port (kubelet probes need no rule)", dir, name)
				}
				open[name] = true
				if name == "metrics" && len(r.From) == 0 {
					t.Errorf("%s: NetworkPolicy opens metrics to everyone", dir)
				}
			}
		}
		if len(open) != len(servedPorts) {
			t.Errorf("%s: NetworkPolicy opens %v, want exactly %v", dir, open, servedPorts)
		}
		if len(np.Spec.Egress) != 0 || !contains(np.Spec.PolicyTypes, networkingv1.PolicyTypeEgress) {
			t.Errorf("%s: egress should be denied (the server calls nothing)", dir)
		}
	}
}

func contains[T comparable](s []T, v T) bool {
	for _, x := range s {
		if x == v {
			return true
		}
	}
	return false
}

// drain is a pod's shutdown timeline.
type drain struct {
	preStop, delay, grace, termination time.Duration
}

// drainTiming reads the timeline: the preStop sleep, the server's shutdown
// delay and grace (the pod's variables, else the server's defaults) and the
// pod's termination grace period (Kubernetes' default 30 s when unset).
func drainTiming(t testing.TB, d *appsv1.Deployment, env map[string]string) drain {
	t.Helper()
	c := serverContainer(t, d)
	var dr drain
	if c.Lifecycle == nil || c.Lifecycle.PreStop == nil || c.Lifecycle.PreStop.Sleep == nil {
		t.Fatalf("Deployment %s: no preStop sleep", d.Name)
	}
	dr.preStop = time.Duration(c.Lifecycle.PreStop.Sleep.Seconds) * time.Second
	def := server.DefaultConfig()
	dur := func(key string, v time.Duration) time.Duration {
		s, ok := env[key]
		if !ok {
			return v
		}
		x, err := time.ParseDuration(s)
		if err != nil {
			t.Fatalf("%s=%q: %v", key, s, err)
		}
		return x
	}
	dr.delay = dur(envForFlag("shutdown-delay"), def.ShutdownDelay)
	dr.grace = dur(envForFlag("shutdown-grace"), def.ShutdownGrace)
	dr.termination = 30 * time.Second
	if p := d.Spec.Template.Spec.TerminationGracePeriodSeconds; p != nil {
		dr.termination = time.Duration(*p) * time.Second
	}
	return dr
}

// drainMargin is the least time left between the end of the drain and the
// kubelet's SIGKILL: the metrics listener's close (≤ 1 s, server.go) and
// process exit, plus scheduling slack (common practice, no source).
const drainMargin = 5 * time.Second

// TestDrainTimingAddsUp: preStop + shutdown delay + shutdown grace +
// margin ≤ terminationGracePeriodSeconds, so in-flight work always gets
// the server's full grace before the kubelet kills the container; the
// readiness probe notices the drain within the shutdown delay.
func TestDrainTimingAddsUp(t *testing.T) {
	for _, dir := range []string{"base", "overlays/dev", "overlays/production"} {
		b := buildKustomization(t, dir)
		d := deploymentOf(t, b)
		c := serverContainer(t, d)
		dr := drainTiming(t, d, containerEnv(t, b, c))
		if dr.preStop <= 0 {
			t.Errorf("%s: preStop sleep %v, want > 0 so endpoints drop the pod before SIGTERM", dir, dr.preStop)
		}
		if total := dr.preStop + dr.delay + dr.grace + drainMargin; total > dr.termination {
			t.Errorf("%s: preStop %v + shutdown delay %v + grace %v + margin %v = %v > terminationGracePeriodSeconds %v",
				dir, dr.preStop, dr.delay, dr.grace, drainMargin, total, dr.termination)
		}
		if rp := c.ReadinessProbe; rp != nil && dr.delay > 0 {
			notice := time.Duration(rp.PeriodSeconds*rp.FailureThreshold) * time.Second
			if notice > dr.preStop+dr.delay {
				t.Errorf("%s: readiness notices a drain after %v, longer than preStop + shutdown delay %v", dir, notice, dr.preStop+dr.delay)
			}
		}
	}
}

// selfSignedCert writes a certificate and key (PEM) for localhost.
func selfSignedCert(t testing.TB, certPath, keyPath string) {
	t.Helper()
	key, err := ecdsa.GenerateKey(elliptic.P256(), rand.Reader)
	if err != nil {
		t.Fatal(err)
	}
	tmpl := &x509.Certificate{
		SerialNumber: big.NewInt(1),
		Subject:      pkix.Name{CommonName: "kinchain deploy check"},
		DNSNames:     []string{"localhost"},
		IPAddresses:  []net.IP{net.IPv4(127, 0, 0, 1)},
		NotBefore:    time.Now().Add(-time.Hour),
		NotAfter:     time.Now().Add(time.Hour),
		KeyUsage:     x509.KeyUsageDigitalSignature,
		ExtKeyUsage:  []x509.ExtKeyUsage{x509.ExtKeyUsageServerAuth},
	}
	der, err := x509.CreateCertificate(rand.Reader, tmpl, tmpl, &key.PublicKey, key)
	if err != nil {
		t.Fatal(err)
	}
	kb, err := x509.MarshalPKCS8PrivateKey(key)
	if err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(certPath, pem.EncodeToMemory(&pem.Block{Type: "CERTIFICATE", Bytes: der}), 0o440); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(keyPath, pem.EncodeToMemory(&pem.Block{Type: "PRIVATE KEY", Bytes: kb}), 0o440); err != nil {
		t.Fatal(err)
	}
}

// mountedSecretFiles emulates the pod's Secret volumes on this machine:
// each env value under a read-only Secret mount is rewritten to a file in
// a scratch directory holding what a kubernetes.io/tls Secret holds
// (tls.crt, tls.key: a fresh self-signed pair), with the volume's
// defaultMode and the pod's fsGroup as group. Values pointing at files the
// pod does not mount fail the test.
func mountedSecretFiles(t *testing.T, d *appsv1.Deployment, env map[string]string) map[string]string {
	t.Helper()
	c := serverContainer(t, d)
	vols := map[string]corev1.Volume{}
	for _, v := range d.Spec.Template.Spec.Volumes {
		vols[v.Name] = v
	}
	out := map[string]string{}
	for k, v := range env {
		out[k] = v
	}
	for _, key := range []string{envForFlag("tls-cert"), envForFlag("tls-key")} {
		path, ok := env[key]
		if !ok {
			continue
		}
		var mount *corev1.VolumeMount
		for i, m := range c.VolumeMounts {
			if strings.HasPrefix(path, strings.TrimSuffix(m.MountPath, "/")+"/") {
				mount = &c.VolumeMounts[i]
			}
		}
		if mount == nil {
			t.Fatalf("%s=%s is not under any volume mount", key, path)
		}
		vol, ok := vols[mount.Name]
		if !ok || vol.Secret == nil {
			t.Fatalf("%s=%s: mount %s is not a Secret volume", key, path, mount.Name)
		}
		if !mount.ReadOnly {
			t.Errorf("the Secret %s is mounted writable", vol.Secret.SecretName)
		}
		file := strings.TrimPrefix(path, strings.TrimSuffix(mount.MountPath, "/")+"/")
		if file != corev1.TLSCertKey && file != corev1.TLSPrivateKeyKey {
			t.Fatalf("%s=%s: a kubernetes.io/tls Secret holds %s and %s, not %s", key, path, corev1.TLSCertKey, corev1.TLSPrivateKeyKey, file)
		}
		dir := filepath.Join(scratchDir, "secret-"+vol.Secret.SecretName)
		if _, err := os.Stat(filepath.Join(dir, corev1.TLSCertKey)); err != nil {
			if err := os.MkdirAll(dir, 0o755); err != nil {
				t.Fatal(err)
			}
			selfSignedCert(t, filepath.Join(dir, corev1.TLSCertKey), filepath.Join(dir, corev1.TLSPrivateKeyKey))
			mode := os.FileMode(0o644) // Kubernetes' default
			if vol.Secret.DefaultMode != nil {
				mode = os.FileMode(*vol.Secret.DefaultMode)
			}
			for _, f := range []string{corev1.TLSCertKey, corev1.TLSPrivateKeyKey} {
				p := filepath.Join(dir, f)
				if os.Geteuid() == 0 {
					if fsg := d.Spec.Template.Spec.SecurityContext.FSGroup; fsg != nil {
						if err := os.Chown(p, 0, int(*fsg)); err != nil {
							t.Fatal(err)
						}
					}
				}
				if err := os.Chmod(p, mode); err != nil {
					t.Fatal(err)
				}
			}
		}
		out[key] = filepath.Join(dir, file)
	}
	return out
}

// startupConfig is the effective configuration the server logs at start
// (the fields these checks use).
type startupConfig struct {
	Reflection            bool   `json:"reflection"`
	Production            bool   `json:"production"`
	TLS                   bool   `json:"tls"`
	MaxConcurrentRequests int    `json:"max_concurrent_requests"`
	MaxConcurrentStreams  int    `json:"max_concurrent_streams"`
	MaxRecvMsgBytes       int    `json:"max_recv_msg_bytes"`
	MaxConnectionAge      string `json:"max_connection_age"`
	ShutdownDelay         string `json:"shutdown_delay"`
	ShutdownGrace         string `json:"shutdown_grace"`
}

// loggedConfig reads the "config" group of the server's start-up line.
func loggedConfig(t testing.TB, p *serveProc) startupConfig {
	t.Helper()
	for _, l := range strings.Split(p.logText(), "\n") {
		var rec struct {
			Config *startupConfig `json:"config"`
		}
		if json.Unmarshal([]byte(l), &rec) == nil && rec.Config != nil {
			return *rec.Config
		}
	}
	t.Fatalf("no config in the start-up log:\n%s", p.logText())
	return startupConfig{}
}

// reflectionServices lists the services through gRPC server reflection;
// an UNIMPLEMENTED answer means reflection is off.
func reflectionServices(addr string, useTLS bool) ([]string, error) {
	creds := insecure.NewCredentials()
	if useTLS {
		creds = credentials.NewTLS(&tls.Config{InsecureSkipVerify: true})
	}
	cc, err := grpc.NewClient("passthrough:///"+addr, grpc.WithTransportCredentials(creds))
	if err != nil {
		return nil, err
	}
	defer cc.Close()
	ctx, cancel := context.WithTimeout(context.Background(), 5*time.Second)
	defer cancel()
	st, err := rpb.NewServerReflectionClient(cc).ServerReflectionInfo(ctx)
	if err != nil {
		return nil, err
	}
	if err := st.Send(&rpb.ServerReflectionRequest{MessageRequest: &rpb.ServerReflectionRequest_ListServices{ListServices: "*"}}); err != nil {
		return nil, err
	}
	r, err := st.Recv()
	if err != nil {
		return nil, err
	}
	var out []string
	for _, s := range r.GetListServicesResponse().GetService() {
		out = append(out, s.GetName())
	}
	return out, nil
}

// TestOverlaysRunWithTheirConfig starts the Dockerfile's binary with each
// overlay's complete environment (image ENV, ConfigMap, container env; the
// TLS Secret emulated; listen addresses moved to loopback by flags), as the
// image's user when the test runs as root, and checks that the server
// accepts the settings and that the overlay's own probes pass against it:
// every probe of the container is run the way the kubelet runs it (gRPC
// health Check for the named service; HTTP GET with the probe's scheme,
// certificates unverified). It also checks what the overlays promise:
// reflection on in dev and off in production, TLS in production, and the
// settings the alerts and the drain timing rely on.
func TestOverlaysRunWithTheirConfig(t *testing.T) {
	if testing.Short() {
		t.Skip("builds and runs the binary")
	}
	t.Parallel()
	d := readRepoDockerfile(t)
	uid, gid := imageUser(t, d)
	for _, dir := range []string{"overlays/dev", "overlays/production"} {
		t.Run(filepath.Base(dir), func(t *testing.T) {
			t.Parallel()
			b := buildKustomization(t, dir)
			dep := deploymentOf(t, b)
			c := serverContainer(t, dep)
			env := mountedSecretFiles(t, dep, containerEnv(t, b, c))
			o := serveOpts{args: loopbackArgs, env: imageEnv(t, d, env), dir: "/"}
			if os.Geteuid() == 0 {
				o.cred = &syscall.Credential{Uid: uint32(uid), Gid: uint32(gid)}
				if fsg := dep.Spec.Template.Spec.SecurityContext.FSGroup; fsg != nil {
					o.cred.Groups = []uint32{uint32(*fsg)} // the kubelet adds fsGroup to the supplementary groups
				}
			}
			p := startServe(t, kinchainBinary(t), o)
			cfg := loggedConfig(t, p)
			useTLS := cfg.TLS

			wantReflection := dir == "overlays/dev"
			if cfg.Reflection != wantReflection {
				t.Errorf("reflection %v, want %v", cfg.Reflection, wantReflection)
			}
			svcs, err := reflectionServices(p.bound.GRPC, useTLS)
			switch {
			case wantReflection && (err != nil || !contains(svcs, kinchainv1.KinematicsService_ServiceDesc.ServiceName)):
				t.Errorf("reflection lists %v (%v), want kinchain.v1.KinematicsService", svcs, err)
			case !wantReflection && status.Code(err) != codes.Unimplemented:
				t.Errorf("reflection answered %v %v, want UNIMPLEMENTED", svcs, err)
			}
			if want := dir == "overlays/production"; useTLS != want || cfg.Production != want {
				t.Errorf("TLS %v, production mode %v; want both %v", useTLS, cfg.Production, want)
			}

			dr := drainTiming(t, dep, env)
			if cfg.ShutdownDelay != dr.delay.String() || cfg.ShutdownGrace != dr.grace.String() {
				t.Errorf("server runs with shutdown delay %s and grace %s; the drain check assumed %v and %v", cfg.ShutdownDelay, cfg.ShutdownGrace, dr.delay, dr.grace)
			}
			if n, err := strconv.Atoi(env[envForFlag("max-requests")]); err != nil || n != cfg.MaxConcurrentRequests {
				t.Errorf("max concurrent requests %d, the ConfigMap says %q", cfg.MaxConcurrentRequests, env[envForFlag("max-requests")])
			}
			if n, err := strconv.Atoi(env[envForFlag("max-streams")]); err != nil || n != cfg.MaxConcurrentStreams {
				t.Errorf("max concurrent streams %d, the ConfigMap says %q", cfg.MaxConcurrentStreams, env[envForFlag("max-streams")])
			}
			if cfg.MaxConnectionAge == "0s" {
				t.Error("max connection age 0: clients of the headless Service would never re-resolve and find new replicas")
			}

			ports := map[string]string{"grpc": p.bound.GRPC, "http": p.bound.HTTP, "metrics": p.bound.Metrics, "health": p.bound.Health}
			for what, pr := range map[string]*corev1.Probe{"readiness": c.ReadinessProbe, "liveness": c.LivenessProbe, "startup": c.StartupProbe} {
				if pr == nil {
					continue
				}
				if err := runProbe(pr, c, ports, useTLS); err != nil {
					t.Errorf("%s probe: %v\n%s", what, err, p.logText())
				}
			}
			if code, _, err := httpGet("http://" + p.bound.Metrics + "/metrics"); code != 200 {
				t.Errorf("metrics over plain HTTP (as the ServiceMonitor scrapes): %d %v", code, err)
			}
			if _, err := p.stop(t, dr.termination-dr.preStop); err != nil {
				t.Errorf("exit after SIGTERM: %v\n%s", err, p.logText())
			}
		})
	}
}

// runProbe runs a Kubernetes probe against the local server, as the
// kubelet would: the container port it names is looked up and mapped to
// the bound loopback address.
func runProbe(pr *corev1.Probe, c *corev1.Container, bound map[string]string, tlsOn bool) error {
	byNumber := map[int32]string{}
	for _, p := range c.Ports {
		byNumber[p.ContainerPort] = p.Name
	}
	switch {
	case pr.GRPC != nil:
		name, ok := byNumber[pr.GRPC.Port]
		if !ok {
			return fmt.Errorf("gRPC probe port %d is no container port", pr.GRPC.Port)
		}
		if tlsOn {
			return errors.New("gRPC probe against a TLS port: the kubelet's gRPC probe speaks plaintext only")
		}
		svc := ""
		if pr.GRPC.Service != nil {
			svc = *pr.GRPC.Service
		}
		st, err := grpcHealth(bound[name], svc, false)
		if err != nil {
			return fmt.Errorf("gRPC health %q: %w", svc, err)
		}
		if st != healthpb.HealthCheckResponse_SERVING {
			return fmt.Errorf("gRPC health %q: %v", svc, st)
		}
		return nil
	case pr.HTTPGet != nil:
		name := pr.HTTPGet.Port.String()
		if pr.HTTPGet.Port.Type == intstr.Int {
			name = byNumber[int32(pr.HTTPGet.Port.IntValue())]
		}
		addr, ok := bound[name]
		if !ok {
			return fmt.Errorf("HTTP probe port %s is no container port", pr.HTTPGet.Port.String())
		}
		scheme := "http"
		if pr.HTTPGet.Scheme == corev1.URISchemeHTTPS {
			scheme = "https"
		}
		if (scheme == "https") != (tlsOn && (name == "grpc" || name == "http")) {
			return fmt.Errorf("HTTP probe scheme %s, but the server's %s port TLS is %v", scheme, name, tlsOn)
		}
		code, body, err := httpGet(scheme + "://" + addr + pr.HTTPGet.Path)
		if err != nil {
			return err
		}
		// The kubelet counts 200–399 as success.
		if code < 200 || code >= 400 {
			return fmt.Errorf("GET %s: %d %s", pr.HTTPGet.Path, code, body)
		}
		return nil
	}
	return errors.New("neither a gRPC nor an HTTP GET probe")
}

// resourceFigures returns the runbook's machine-readable capacity table:
// rows "| key | value |" between the markers <!-- capacity:begin --> and
// <!-- capacity:end --> of deploy/README.md.
func resourceFigures(t testing.TB) map[string]string {
	t.Helper()
	b, err := os.ReadFile("README.md")
	if err != nil {
		t.Fatal(err)
	}
	s := string(b)
	i, j := strings.Index(s, "<!-- capacity:begin -->"), strings.Index(s, "<!-- capacity:end -->")
	if i < 0 || j < i {
		t.Fatal("README.md has no capacity table between <!-- capacity:begin --> and <!-- capacity:end -->")
	}
	out := map[string]string{}
	for _, l := range strings.Split(s[i:j], "\n") {
		f := strings.Split(strings.Trim(strings.TrimSpace(l), "|"), "|")
		if len(f) < 2 {
			continue
		}
		k, v := strings.Trim(strings.TrimSpace(f[0]), "`"), strings.TrimSpace(f[1])
		if k == "" || strings.HasPrefix(k, "-") || k == "figure" {
			continue
		}
		out[k] = v
	}
	return out
}

// figure parses a runbook figure as a number (unit words after it ignored).
func figure(t testing.TB, figs map[string]string, key string) float64 {
	t.Helper()
	v, ok := figs[key]
	if !ok {
		t.Fatalf("runbook capacity table has no %s", key)
	}
	x, err := strconv.ParseFloat(strings.Fields(v)[0], 64)
	if err != nil {
		t.Fatalf("runbook %s = %q: %v", key, v, err)
	}
	return x
}

// TestResourcesMatchRunbook checks the pod's resources against the
// runbook's measured figures (deploy/README.md, from BenchmarkCapacity):
//
//   - memory request ≥ the peak of one long-session analysis (a pod that
//     gets only its request can still serve); limit ≥ the peak measured at
//     full load (every analysis slot busy with long sessions, or every
//     stream slot open) with 25 % headroom (common practice, no source);
//     GOMEMLIMIT between that peak and the limit, so the Go collector
//     works harder before the kernel's OOM killer acts;
//   - CPU: whole cores as the limit (Go sets GOMAXPROCS from it) and
//     KINCHAIN_MAX_REQUESTS = 4 per core, the server's own default ratio
//     (server.DefaultConfig: 4 × GOMAXPROCS); the figures were measured on
//     that many cores;
//   - the runbook's capacity per replica at the autoscaler's target is the
//     measured throughput per CPU-second × the CPU request × the target.
func TestResourcesMatchRunbook(t *testing.T) {
	figs := resourceFigures(t)
	b := buildKustomization(t, "base")
	d := deploymentOf(t, b)
	c := serverContainer(t, d)
	env := containerEnv(t, b, c)
	req, lim := c.Resources.Requests, c.Resources.Limits
	mib := func(q resource.Quantity) float64 { return float64(q.Value()) / (1 << 20) }

	idle := figure(t, figs, "idle_rss_mib")
	onePeak := figure(t, figs, "peak_rss_one_session_mib")
	fullPeak := figure(t, figs, "peak_rss_full_load_mib")
	if got := mib(req[corev1.ResourceMemory]); got < onePeak || got < idle {
		t.Errorf("memory request %.0f MiB < one long-session analysis peak %.0f MiB", got, onePeak)
	}
	if got := mib(lim[corev1.ResourceMemory]); got < 1.25*fullPeak {
		t.Errorf("memory limit %.0f MiB < 1.25 × full-load peak %.0f MiB", got, fullPeak)
	}
	if maxBody := figure(t, figs, "peak_rss_max_body_full_mib"); mib(lim[corev1.ResourceMemory]) <= maxBody {
		t.Errorf("memory limit %.0f MiB ≤ the peak with every slot on a maximal body, %.0f MiB", mib(lim[corev1.ResourceMemory]), maxBody)
	}
	gm, err := parseGoMemLimit(env["GOMEMLIMIT"])
	if err != nil {
		t.Fatal(err)
	}
	if g := float64(gm) / (1 << 20); g <= fullPeak || g >= mib(lim[corev1.ResourceMemory]) {
		t.Errorf("GOMEMLIMIT %.0f MiB should lie between the full-load peak %.0f MiB and the limit %.0f MiB", g, fullPeak, mib(lim[corev1.ResourceMemory]))
	}

	cpuLimit := lim[corev1.ResourceCPU]
	cores := cpuLimit.MilliValue() / 1000
	if cores < 1 || cpuLimit.MilliValue()%1000 != 0 {
		t.Fatalf("CPU limit %s: want whole cores (Go's GOMAXPROCS follows it)", cpuLimit.String())
	}
	if n, _ := strconv.Atoi(env[envForFlag("max-requests")]); int64(n) != 4*cores {
		t.Errorf("KINCHAIN_MAX_REQUESTS=%d, want 4 × the %d-core limit (the server's own default ratio)", n, cores)
	}
	if v := figure(t, figs, "measured_cores"); int64(v) != cores {
		t.Errorf("figures measured on %v cores, the limit is %d cores", v, cores)
	}
	cpuReq := req[corev1.ResourceCPU]
	if cpuReq.MilliValue() <= 0 || cpuReq.Cmp(cpuLimit) > 0 {
		t.Errorf("CPU request %s must be positive and at most the limit %s", cpuReq.String(), cpuLimit.String())
	}
	// Per-replica capacity at the autoscaler's target: throughput scales
	// with CPU while analyses are CPU-bound.
	perCore := figure(t, figs, "analyses_per_cpu_second")
	full := figure(t, figs, "analyses_per_s_full_concurrency")
	if perCore <= 0 || full <= 0 || full > perCore*float64(cores)*1.1 {
		t.Errorf("capacity figures inconsistent: %v analyses/s at full concurrency with %v per CPU-second on %d cores", full, perCore, cores)
	}
	stated := figure(t, figs, "analyses_per_s_at_hpa_target")
	hpa := one[autoscalingv2.HorizontalPodAutoscaler](t, b)
	target := float64(*hpa.Spec.Metrics[0].Resource.Target.AverageUtilization) / 100
	want := perCore * float64(cpuReq.MilliValue()) / 1000 * target
	if stated < 0.9*want || stated > 1.1*want {
		t.Errorf("runbook says %v analyses/s per replica at the autoscaler's target; %v/CPU-s × %s CPU × %.0f %% = %.1f", stated, perCore, cpuReq.String(), target*100, want)
	}
}

// parseGoMemLimit parses a GOMEMLIMIT value: a byte count with an optional
// unit B, KiB, MiB, GiB or TiB (the runtime package documentation,
// "Environment Variables").
func parseGoMemLimit(v string) (int64, error) {
	m := regexp.MustCompile(`^(\d+)(B|KiB|MiB|GiB|TiB)?$`).FindStringSubmatch(v)
	if m == nil {
		return 0, fmt.Errorf("GOMEMLIMIT=%q: not a byte count with B, KiB, MiB, GiB or TiB", v)
	}
	n, err := strconv.ParseInt(m[1], 10, 64)
	if err != nil {
		return 0, fmt.Errorf("GOMEMLIMIT=%q: %v", v, err)
	}
	shift := map[string]uint{"": 0, "B": 0, "KiB": 10, "MiB": 20, "GiB": 30, "TiB": 40}[m[2]]
	return n << shift, nil
}
