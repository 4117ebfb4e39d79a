package server_test

import (
	"context"
	"crypto/ecdsa"
	"crypto/elliptic"
	"crypto/rand"
	"crypto/tls"
	"crypto/x509"
	"crypto/x509/pkix"
	"encoding/pem"
	"fmt"
	"io"
	"math/big"
	"net"
	"net/http"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"google.golang.org/genproto/googleapis/rpc/errdetails"
	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/credentials"
	healthpb "google.golang.org/grpc/health/grpc_health_v1"
	"google.golang.org/grpc/metadata"
	"google.golang.org/grpc/status"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/server"
)

// pki is a test certificate authority with a server certificate for
// 127.0.0.1 and localhost and a client certificate, all made with
// crypto/x509 for the test, plus a client certificate from another CA.
type pki struct {
	dir                  string
	caFile               string
	serverCert, serverKy string
	pool                 *x509.CertPool
	client, rogue        tls.Certificate
}

func newKey(t *testing.T) *ecdsa.PrivateKey {
	t.Helper()
	k, err := ecdsa.GenerateKey(elliptic.P256(), rand.Reader)
	if err != nil {
		t.Fatal(err)
	}
	return k
}

// issue signs tmpl for key with the parent (self-signed when parent is
// nil) and returns the DER.
func issue(t *testing.T, tmpl, parent *x509.Certificate, key, parentKey *ecdsa.PrivateKey) []byte {
	t.Helper()
	if parent == nil {
		parent, parentKey = tmpl, key
	}
	der, err := x509.CreateCertificate(rand.Reader, tmpl, parent, &key.PublicKey, parentKey)
	if err != nil {
		t.Fatal(err)
	}
	return der
}

func caTemplate(name string, serial int64) *x509.Certificate {
	return &x509.Certificate{
		SerialNumber: big.NewInt(serial), Subject: pkix.Name{CommonName: name},
		NotBefore: time.Now().Add(-time.Hour), NotAfter: time.Now().Add(time.Hour),
		IsCA: true, BasicConstraintsValid: true, KeyUsage: x509.KeyUsageCertSign | x509.KeyUsageDigitalSignature,
	}
}

func leaf(name string, serial int64, usage x509.ExtKeyUsage) *x509.Certificate {
	return &x509.Certificate{
		SerialNumber: big.NewInt(serial), Subject: pkix.Name{CommonName: name},
		NotBefore: time.Now().Add(-time.Hour), NotAfter: time.Now().Add(time.Hour),
		KeyUsage: x509.KeyUsageDigitalSignature, ExtKeyUsage: []x509.ExtKeyUsage{usage},
	}
}

func pemFile(t *testing.T, path, typ string, der []byte) {
	t.Helper()
	if err := os.WriteFile(path, pem.EncodeToMemory(&pem.Block{Type: typ, Bytes: der}), 0o600); err != nil {
		t.Fatal(err)
	}
}

func newPKI(t *testing.T) *pki {
	t.Helper()
	p := &pki{dir: t.TempDir()}
	caKey := newKey(t)
	caTmpl := caTemplate("kinchain test CA", 1)
	caDER := issue(t, caTmpl, nil, caKey, nil)
	ca, _ := x509.ParseCertificate(caDER)
	p.pool = x509.NewCertPool()
	p.pool.AddCert(ca)
	p.caFile = filepath.Join(p.dir, "ca.pem")
	pemFile(t, p.caFile, "CERTIFICATE", caDER)

	srvKey := newKey(t)
	st := leaf("kinchain server", 2, x509.ExtKeyUsageServerAuth)
	st.IPAddresses = []net.IP{net.ParseIP("127.0.0.1")}
	st.DNSNames = []string{"localhost"}
	p.serverCert, p.serverKy = filepath.Join(p.dir, "server.pem"), filepath.Join(p.dir, "server-key.pem")
	pemFile(t, p.serverCert, "CERTIFICATE", issue(t, st, ca, srvKey, caKey))
	kb, _ := x509.MarshalECPrivateKey(srvKey)
	pemFile(t, p.serverKy, "EC PRIVATE KEY", kb)

	clientKey := newKey(t)
	p.client = tls.Certificate{Certificate: [][]byte{issue(t, leaf("lab client", 3, x509.ExtKeyUsageClientAuth), ca, clientKey, caKey)}, PrivateKey: clientKey}

	rogueCAKey := newKey(t)
	rogueCA, _ := x509.ParseCertificate(issue(t, caTemplate("some other CA", 4), nil, rogueCAKey, nil))
	rogueKey := newKey(t)
	p.rogue = tls.Certificate{Certificate: [][]byte{issue(t, leaf("rogue client", 5, x509.ExtKeyUsageClientAuth), rogueCA, rogueKey, rogueCAKey)}, PrivateKey: rogueKey}
	return p
}

// tlsClients returns a gRPC client and an HTTP client trusting the test CA,
// presenting cert when it is non-nil.
func (p *pki) tlsClients(t *testing.T, ts *testServer, cert *tls.Certificate) (kinchainv1.KinematicsServiceClient, *grpc.ClientConn, *http.Client) {
	t.Helper()
	cfg := &tls.Config{RootCAs: p.pool, MinVersion: tls.VersionTLS12}
	if cert != nil {
		// Always present it, also when it is not from a CA the server
		// lists (Go's client would send none then).
		cfg.GetClientCertificate = func(*tls.CertificateRequestInfo) (*tls.Certificate, error) { return cert, nil }
	}
	cc, err := grpc.NewClient(ts.srv.Addrs().GRPC, grpc.WithTransportCredentials(credentials.NewTLS(cfg.Clone())))
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { cc.Close() })
	hc := &http.Client{Transport: &http.Transport{TLSClientConfig: cfg.Clone()}}
	t.Cleanup(hc.CloseIdleConnections)
	return kinchainv1.NewKinematicsServiceClient(cc), cc, hc
}

func analyzeOnce(c kinchainv1.KinematicsServiceClient, ctx context.Context) error {
	_, err := c.AnalyzeCapture(ctx, &kinchainv1.AnalyzeCaptureRequest{Capture: goodCapture("auth", 20)})
	return err
}

// postCSV posts a good CSV with an optional Authorization header.
func postCSV(t *testing.T, hc *http.Client, url, authz string) (int, http.Header, string, error) {
	t.Helper()
	req, _ := http.NewRequest("POST", url+"/v1/captures:analyze", strings.NewReader(goodCSV("auth", 20)))
	req.Header.Set("Content-Type", "text/csv")
	if authz != "" {
		req.Header.Set("Authorization", authz)
	}
	resp, err := hc.Do(req)
	if err != nil {
		return 0, nil, "", err
	}
	defer resp.Body.Close()
	b, _ := io.ReadAll(resp.Body)
	return resp.StatusCode, resp.Header, string(b), nil
}

// TestTLSWithCA: TLS only, with certificates from a CA made in the test:
// gRPC and HTTPS work for a client trusting the CA (no client certificate
// needed), plain connections do not.
func TestTLSWithCA(t *testing.T) {
	p := newPKI(t)
	cfg := testConfig()
	cfg.TLSCertFile, cfg.TLSKeyFile = p.serverCert, p.serverKy
	ts := startServer(t, cfg, &fakeAnalyzer{}, nil, false)
	c, _, hc := p.tlsClients(t, ts, nil)
	if err := analyzeOnce(c, context.Background()); err != nil {
		t.Errorf("gRPC over TLS: %v", err)
	}
	if code, _, b, err := postCSV(t, hc, "https://"+ts.srv.Addrs().HTTP, ""); err != nil || code != 200 {
		t.Errorf("HTTPS: %d %v %s", code, err, b)
	}
	// localhost is in the certificate too.
	_, port, _ := net.SplitHostPort(ts.srv.Addrs().HTTP)
	if code, _, _, err := postCSV(t, hc, "https://localhost:"+port, ""); err != nil || code != 200 {
		t.Errorf("HTTPS to localhost: %d %v", code, err)
	}
	if _, _, _, err := postCSV(t, &http.Client{}, "http://"+ts.srv.Addrs().HTTP, ""); err == nil {
		// A plain request to a TLS port gets no valid HTTP answer.
		t.Logf("plain HTTP to the TLS port got an answer (Go's TLS server answers 400 to plain HTTP)")
	}
}

// TestMutualTLS: with a client CA, a client without a certificate and a
// client with a certificate from another CA are refused at the handshake
// on both transports (and counted by reason); a client with a certificate
// from the CA is served.
func TestMutualTLS(t *testing.T) {
	p := newPKI(t)
	cfg := testConfig()
	cfg.TLSCertFile, cfg.TLSKeyFile, cfg.TLSClientCAFile = p.serverCert, p.serverKy, p.caFile
	ts := startServer(t, cfg, &fakeAnalyzer{}, nil, false)
	url := "https://" + ts.srv.Addrs().HTTP

	for _, tc := range []struct {
		name   string
		cert   *tls.Certificate
		ok     bool
		reason string
	}{
		{"no certificate", nil, false, "no_client_cert"},
		{"certificate of another CA", &p.rogue, false, "invalid_client_cert"},
		{"certificate of the client CA", &p.client, true, ""},
	} {
		t.Run(tc.name, func(t *testing.T) {
			c, _, hc := p.tlsClients(t, ts, tc.cert)
			ctx, cancel := context.WithTimeout(context.Background(), 5*time.Second)
			defer cancel()
			err := analyzeOnce(c, ctx)
			code, _, _, herr := postCSV(t, hc, url, "")
			if tc.ok {
				if err != nil || herr != nil || code != 200 {
					t.Errorf("gRPC %v; HTTP %d %v; want both served", err, code, herr)
				}
				return
			}
			if status.Code(err) != codes.Unavailable {
				t.Errorf("gRPC: %v, want the handshake to fail (Unavailable)", err)
			}
			if herr == nil {
				t.Errorf("HTTP: answered %d, want the handshake to fail", code)
			}
			for _, tr := range []string{"grpc", "http"} {
				if n, _, _ := metricValue(t, ts.reg, "kinchain_auth_failures_total", "transport", tr, "reason", tc.reason); n < 1 {
					t.Errorf("auth_failures_total{transport=%s,reason=%s} = %v, want ≥ 1", tr, tc.reason, n)
				}
			}
		})
	}
	// gRPC health needs the client certificate too (it shares the port);
	// the health listener is the way for probes without one.
}

// writeTokens writes a token file and returns its path.
func writeTokens(t *testing.T, lines ...string) string {
	t.Helper()
	path := filepath.Join(t.TempDir(), "tokens")
	if err := os.WriteFile(path, []byte(strings.Join(lines, "\n")+"\n"), 0o600); err != nil {
		t.Fatal(err)
	}
	return path
}

func TestParseTokens(t *testing.T) {
	h1, h2 := server.HashToken("alpha"), server.HashToken("beta")
	if h1 != "8ed3f6ad685b959ead7022518e1af76cd816f8e8ec7ccdda1ed4018e8f2223f8" { // sha256("alpha"), from `printf %s alpha | sha256sum`
		t.Errorf("HashToken(alpha) = %s", h1)
	}
	ts, err := server.ParseTokens(strings.NewReader("# lab tokens\n\n" + h1 + "  lab-a  2.5\n" + strings.ToUpper(h2) + "\tbatch\t10\t40\n" + server.HashToken("gamma") + "\n"))
	if err != nil {
		t.Fatal(err)
	}
	if len(ts) != 3 || ts[0].Name != "lab-a" || ts[0].Rate != 2.5 || ts[0].Burst != 3 || ts[1].Name != "batch" || ts[1].Burst != 40 || ts[2].Name != "line5" || ts[2].Rate != 0 {
		t.Errorf("tokens = %+v", ts)
	}
	for _, tc := range []struct{ in, want string }{
		{"", "no tokens"},
		{"abc\n", "line 1"},
		{strings.Repeat("zz", 32) + "\n", "not hex"},
		{h1 + " bad/name\n", "name"},
		{h1 + " a 0\n", "rate"},
		{h1 + " a -\n" + h1 + " b\n", "line 2: the same digest as line 1"},
		{h1 + " a\n" + h2 + " a\n", "already used"},
		{h1 + " a 1 0\n", "burst"},
		{h1 + " a - 5\n", "a burst needs a rate"},
		{h1 + " a 1 2 3\n", "fields"},
	} {
		if _, err := server.ParseTokens(strings.NewReader(tc.in)); err == nil || !strings.Contains(err.Error(), tc.want) {
			t.Errorf("%q: %v, want an error containing %q", tc.in, err, tc.want)
		}
	}
}

// TestBearerTokens: with a token file, over TLS on both transports: no
// token, a wrong token and a malformed header all get the same answer
// (UNAUTHENTICATED / 401 with the same body and challenge, no detail); the
// right token is served; a token over its rate limit gets
// RESOURCE_EXHAUSTED / 429 with a retry hint; health (gRPC health, /healthz,
// /readyz, and the separate health listener) needs no token. Metrics count
// failures by reason and rate-limited calls by token name, and neither
// the metrics nor the log ever hold a token or its hash.
func TestBearerTokens(t *testing.T) {
	p := newPKI(t)
	const good, limited = "s3cret-lab-token", "s3cret-batch-token"
	cfg := testConfig()
	cfg.TLSCertFile, cfg.TLSKeyFile = p.serverCert, p.serverKy
	cfg.HealthAddr = "127.0.0.1:0"
	cfg.TokenFile = writeTokens(t, "# test tokens", server.HashToken(good)+" lab", server.HashToken(limited)+" batch 0.5 2")
	ts := startServer(t, cfg, &fakeAnalyzer{}, nil, false)
	c, cc, hc := p.tlsClients(t, ts, nil)
	url := "https://" + ts.srv.Addrs().HTTP
	withToken := func(tok string) context.Context {
		return metadata.AppendToOutgoingContext(context.Background(), "authorization", tok)
	}

	// gRPC: the three failures look the same.
	var msgs []string
	for _, authz := range []string{"", "Bearer wrong-token", "Basic czNjcmV0", "Bearer "} {
		ctx := context.Background()
		if authz != "" {
			ctx = withToken(authz)
		}
		err := analyzeOnce(c, ctx)
		st := status.Convert(err)
		if st.Code() != codes.Unauthenticated || len(st.Details()) != 0 {
			t.Errorf("gRPC with %q: %v, want Unauthenticated without details", authz, err)
		}
		msgs = append(msgs, st.Message())
	}
	for _, m := range msgs[1:] {
		if m != msgs[0] {
			t.Errorf("gRPC failure messages differ: %q", msgs)
		}
	}
	if err := analyzeOnce(c, withToken("Bearer "+good)); err != nil {
		t.Errorf("gRPC with the right token: %v", err)
	}
	if err := analyzeOnce(c, withToken("bearer "+good)); err != nil { // the scheme in any case (RFC 9110 §11.1)
		t.Errorf("gRPC with a lower-case scheme: %v", err)
	}
	// Streams need the token as well.
	st, err := c.StreamCapture(context.Background())
	if err == nil {
		_, err = st.Recv()
	}
	if status.Code(err) != codes.Unauthenticated {
		t.Errorf("stream without a token: %v", err)
	}

	// HTTP: the same.
	var bodies []string
	for _, authz := range []string{"", "Bearer wrong-token", "Basic czNjcmV0"} {
		code, hdr, body, err := postCSV(t, hc, url, authz)
		if err != nil || code != http.StatusUnauthorized || hdr.Get("WWW-Authenticate") != `Bearer realm="kinchain"` {
			t.Errorf("HTTP with %q: %d %v %q", authz, code, err, hdr.Get("WWW-Authenticate"))
		}
		bodies = append(bodies, body)
	}
	for _, b := range bodies[1:] {
		if b != bodies[0] || strings.Contains(b, "field") {
			t.Errorf("HTTP failure bodies differ or carry detail: %q", bodies)
		}
	}
	if code, _, b, err := postCSV(t, hc, url, "Bearer "+good); err != nil || code != 200 {
		t.Errorf("HTTP with the right token: %d %v %s", code, err, b)
	}
	// Everything but the probes needs the token: /openapi.json too.
	if resp, err := hc.Get(url + "/openapi.json"); err != nil || resp.StatusCode != 401 {
		t.Errorf("openapi without a token: %v %v", resp, err)
	} else {
		resp.Body.Close()
	}

	// Rate limit of the "batch" token: burst 2, then 0.5/s.
	var grpcBusy error
	for i := 0; i < 3; i++ {
		grpcBusy = analyzeOnce(c, withToken("Bearer "+limited))
	}
	st2 := status.Convert(grpcBusy)
	var retry time.Duration
	for _, d := range st2.Details() {
		if ri, ok := d.(*errdetails.RetryInfo); ok {
			retry = ri.GetRetryDelay().AsDuration()
		}
	}
	if st2.Code() != codes.ResourceExhausted || retry != 2*time.Second {
		t.Errorf("third call of the limited token: %v (retry %v), want ResourceExhausted, retry 2s", grpcBusy, retry)
	}
	code, hdr, _, _ := postCSV(t, hc, url, "Bearer "+limited)
	if code != http.StatusTooManyRequests || hdr.Get("Retry-After") != "2" {
		t.Errorf("HTTP over the rate limit: %d, Retry-After %q; want 429, 2", code, hdr.Get("Retry-After"))
	}
	// The other token is not affected.
	if err := analyzeOnce(c, withToken("Bearer "+good)); err != nil {
		t.Errorf("the unlimited token after the other's limit: %v", err)
	}

	// Health needs no token: gRPC health, the probes, the health listener.
	if r, err := healthpb.NewHealthClient(cc).Check(context.Background(), &healthpb.HealthCheckRequest{}); err != nil || r.GetStatus() != healthpb.HealthCheckResponse_SERVING {
		t.Errorf("gRPC health without a token: %v %v", r, err)
	}
	for _, u := range []string{url + "/healthz", url + "/readyz"} {
		if resp, err := hc.Get(u); err != nil || resp.StatusCode != 200 {
			t.Errorf("%s without a token: %v %v", u, resp, err)
		} else {
			resp.Body.Close()
		}
	}
	for _, path := range []string{"/healthz", "/readyz"} {
		if resp, err := http.Get("http://" + ts.srv.Addrs().Health + path); err != nil || resp.StatusCode != 200 {
			t.Errorf("health listener %s: %v %v", path, resp, err)
		} else {
			resp.Body.Close()
		}
	}
	if resp, err := http.Post("http://"+ts.srv.Addrs().Health+"/v1/captures:analyze", "text/csv", strings.NewReader("x")); err == nil {
		resp.Body.Close()
		if resp.StatusCode != http.StatusNotFound && resp.StatusCode != http.StatusMethodNotAllowed {
			t.Errorf("the health listener serves analyses: %d", resp.StatusCode)
		}
	}

	// Metrics: by reason (grpc: missing 1+1 stream, malformed 2; http:
	// missing 1+1 openapi, unknown 1, malformed 1) and by token name.
	for _, m := range []struct {
		tr, reason string
		want       float64
	}{
		{"grpc", "missing_token", 2}, {"grpc", "unknown_token", 1}, {"grpc", "malformed_token", 2},
		{"http", "missing_token", 2}, {"http", "unknown_token", 1}, {"http", "malformed_token", 1},
	} {
		if n, _, _ := metricValue(t, ts.reg, "kinchain_auth_failures_total", "transport", m.tr, "reason", m.reason); n != m.want {
			t.Errorf("auth_failures_total{%s,%s} = %v, want %v", m.tr, m.reason, n, m.want)
		}
	}
	if n, _, _ := metricValue(t, ts.reg, "kinchain_rate_limited_total", "token", "batch"); n != 2 {
		t.Errorf("rate_limited_total{token=batch} = %v, want 2", n)
	}
	resp, err := http.Get("http://" + ts.srv.Addrs().Metrics + "/metrics")
	if err != nil {
		t.Fatal(err)
	}
	mb, _ := io.ReadAll(resp.Body)
	resp.Body.Close()
	logs := ts.logs.String()
	for _, secret := range []string{good, limited, server.HashToken(good), "wrong-token"} {
		if strings.Contains(string(mb), secret) || strings.Contains(logs, secret) {
			t.Errorf("%q appears in the metrics or the log", secret)
		}
	}
	if !strings.Contains(logs, `"auth.token":"lab"`) {
		t.Errorf("the log does not name the token of authenticated calls")
	}
}

// TestProductionConfig: production mode needs TLS and refuses reflection.
func TestProductionConfig(t *testing.T) {
	cfg := testConfig()
	cfg.Production = true
	err := cfg.Validate()
	if err == nil || !strings.Contains(err.Error(), "needs TLS") || !strings.Contains(err.Error(), "Reflection must be off") {
		t.Errorf("production without TLS, with reflection: %v", err)
	}
	p := newPKI(t)
	cfg.TLSCertFile, cfg.TLSKeyFile, cfg.Reflection = p.serverCert, p.serverKy, false
	if err := cfg.Validate(); err != nil {
		t.Errorf("production with TLS, no reflection: %v", err)
	}
	cfg = testConfig()
	cfg.TLSClientCAFile = p.caFile
	if err := cfg.Validate(); err == nil || !strings.Contains(err.Error(), "TLSClientCAFile") {
		t.Errorf("client CA without TLS: %v", err)
	}
	cfg = testConfig()
	cfg.TokenFile = writeTokens(t, "nonsense")
	if _, err := server.New(cfg, &fakeAnalyzer{}, nil, nil, nil); err == nil || !strings.Contains(err.Error(), "token file") {
		t.Errorf("New with a bad token file: %v", err)
	}
}

// BenchmarkTokenCheck times the authentication of an HTTP request with a
// missing, a malformed, a wrong and the right token against a file of
// ten tokens: the digest comparison runs over every token in every case,
// so the four take the same time within noise. (Timing is a benchmark,
// never a test assertion.)
func BenchmarkTokenCheck(b *testing.B) {
	var lines []string
	for i := 0; i < 10; i++ {
		lines = append(lines, fmt.Sprintf("%s t%d", server.HashToken(fmt.Sprintf("token-%d", i)), i))
	}
	dir := b.TempDir()
	path := filepath.Join(dir, "tokens")
	if err := os.WriteFile(path, []byte(strings.Join(lines, "\n")), 0o600); err != nil {
		b.Fatal(err)
	}
	cfg := server.DefaultConfig()
	cfg.GRPCAddr, cfg.HTTPAddr, cfg.MetricsAddr = "127.0.0.1:0", "", ""
	cfg.TokenFile = path
	srv, err := server.New(cfg, &fakeAnalyzer{}, nil, nil, nil)
	if err != nil {
		b.Fatal(err)
	}
	for _, c := range []struct{ name, authz string }{
		{"missing", ""}, {"malformed", "Basic dG9rZW4tOQ=="}, {"wrong", "Bearer token-x"}, {"right", "Bearer token-9"},
	} {
		b.Run(c.name, func(b *testing.B) {
			for b.Loop() {
				_ = server.CheckTokenForTest(srv, c.authz)
			}
		})
	}
}
