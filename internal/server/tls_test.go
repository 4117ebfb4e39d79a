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
	"math/big"
	"net"
	"net/http"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"google.golang.org/grpc"
	"google.golang.org/grpc/credentials"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/server"
)

// selfSigned writes a self-signed certificate for 127.0.0.1 and its key,
// returning their paths and a pool trusting the certificate.
func selfSigned(t *testing.T) (certFile, keyFile string, pool *x509.CertPool) {
	t.Helper()
	dir := t.TempDir()
	certFile, keyFile = filepath.Join(dir, "cert.pem"), filepath.Join(dir, "key.pem")
	cert := writeSelfSigned(t, certFile, keyFile, 1, time.Hour)
	pool = x509.NewCertPool()
	pool.AddCert(cert)
	return certFile, keyFile, pool
}

// writeSelfSigned writes a self-signed certificate for 127.0.0.1 with the
// serial number and lifetime, and its key, to the two paths.
func writeSelfSigned(t *testing.T, certFile, keyFile string, serial int64, life time.Duration) *x509.Certificate {
	t.Helper()
	key, err := ecdsa.GenerateKey(elliptic.P256(), rand.Reader)
	if err != nil {
		t.Fatal(err)
	}
	tmpl := &x509.Certificate{
		SerialNumber: big.NewInt(serial),
		Subject:      pkix.Name{CommonName: "kinchain test"},
		IPAddresses:  []net.IP{net.ParseIP("127.0.0.1")},
		NotBefore:    time.Now().Add(-time.Hour),
		NotAfter:     time.Now().Add(life).Truncate(time.Second),
		KeyUsage:     x509.KeyUsageDigitalSignature,
		ExtKeyUsage:  []x509.ExtKeyUsage{x509.ExtKeyUsageServerAuth},
	}
	der, err := x509.CreateCertificate(rand.Reader, tmpl, tmpl, &key.PublicKey, key)
	if err != nil {
		t.Fatal(err)
	}
	kb, err := x509.MarshalECPrivateKey(key)
	if err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(certFile, pem.EncodeToMemory(&pem.Block{Type: "CERTIFICATE", Bytes: der}), 0o600); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(keyFile, pem.EncodeToMemory(&pem.Block{Type: "EC PRIVATE KEY", Bytes: kb}), 0o600); err != nil {
		t.Fatal(err)
	}
	cert, err := x509.ParseCertificate(der)
	if err != nil {
		t.Fatal(err)
	}
	return cert
}

// TestTLSCertificateRenewal: the server picks up a renewed key pair from
// its files without a restart (certs.go), on both listeners, and keeps
// serving the last good one when the files do not load. What a client is
// served is read from the handshake (crypto/tls ConnectionState); the
// metrics from the registry.
func TestTLSCertificateRenewal(t *testing.T) {
	defer server.SetCertCheckIntervalForTest(time.Millisecond)()
	dir := t.TempDir()
	certFile, keyFile := filepath.Join(dir, "tls.crt"), filepath.Join(dir, "tls.key")
	first := writeSelfSigned(t, certFile, keyFile, 1, time.Hour)
	cfg := testConfig()
	cfg.TLSCertFile, cfg.TLSKeyFile = certFile, keyFile
	ts := startServer(t, cfg, &fakeAnalyzer{}, nil, false)

	served := func(addr string) *big.Int {
		t.Helper()
		time.Sleep(5 * time.Millisecond) // past the check interval
		// Any certificate: the test reads which one is served.
		conn, err := tls.Dial("tcp", addr, &tls.Config{InsecureSkipVerify: true, NextProtos: []string{"h2"}})
		if err != nil {
			t.Fatalf("handshake with %s: %v", addr, err)
		}
		defer conn.Close()
		return conn.ConnectionState().PeerCertificates[0].SerialNumber
	}
	addrs := []string{ts.srv.Addrs().GRPC, ts.srv.Addrs().HTTP}
	for _, a := range addrs {
		if got := served(a); got.Int64() != 1 {
			t.Fatalf("%s serves serial %v at start, want 1", a, got)
		}
	}
	expiry := func() float64 {
		v, _, ok := metricValue(t, ts.reg, "kinchain_tls_certificate_expiry_timestamp_seconds", "cert_file", "tls.crt")
		if !ok {
			t.Fatal("no kinchain_tls_certificate_expiry_timestamp_seconds series")
		}
		return v
	}
	if got := expiry(); got != float64(first.NotAfter.Unix()) {
		t.Errorf("expiry %v, want %v", got, first.NotAfter.Unix())
	}

	// Renewed in place, as a Secret volume is: a new pair, later expiry.
	second := writeSelfSigned(t, certFile, keyFile, 2, 48*time.Hour)
	later := time.Now().Add(2 * time.Second)
	for _, f := range []string{certFile, keyFile} {
		if err := os.Chtimes(f, later, later); err != nil {
			t.Fatal(err)
		}
	}
	for _, a := range addrs {
		if got := served(a); got.Int64() != 2 {
			t.Errorf("%s serves serial %v after the renewal, want 2", a, got)
		}
	}
	if got := expiry(); got != float64(second.NotAfter.Unix()) {
		t.Errorf("expiry %v after the renewal, want %v", got, second.NotAfter.Unix())
	}
	if v, _, _ := metricValue(t, ts.reg, "kinchain_tls_certificate_reloads_total", "result", "ok"); v != 1 {
		t.Errorf("reloads ok = %v, want 1", v)
	}

	// A half-written renewal: the last good pair stays.
	if err := os.WriteFile(certFile, []byte("-----BEGIN CERTIFICATE-----\ntruncated"), 0o600); err != nil {
		t.Fatal(err)
	}
	for _, a := range addrs {
		if got := served(a); got.Int64() != 2 {
			t.Errorf("%s serves serial %v after a broken renewal, want 2 still", a, got)
		}
	}
	if v, _, _ := metricValue(t, ts.reg, "kinchain_tls_certificate_reloads_total", "result", "error"); v != 1 {
		t.Errorf("reloads error = %v, want 1 (one change, looked at once)", v)
	}
	if !strings.Contains(ts.logs.String(), "does not load") {
		t.Error("the broken renewal is not logged")
	}
}

func TestTLS(t *testing.T) {
	certFile, keyFile, pool := selfSigned(t)
	cfg := testConfig()
	cfg.TLSCertFile, cfg.TLSKeyFile = certFile, keyFile
	ts := startServer(t, cfg, &fakeAnalyzer{}, nil, false)

	cc, err := grpc.NewClient(ts.srv.Addrs().GRPC, grpc.WithTransportCredentials(credentials.NewTLS(&tls.Config{RootCAs: pool})))
	if err != nil {
		t.Fatal(err)
	}
	defer cc.Close()
	if _, err := kinchainv1.NewKinematicsServiceClient(cc).AnalyzeCapture(context.Background(), &kinchainv1.AnalyzeCaptureRequest{Capture: goodCapture("tls", 20)}); err != nil {
		t.Errorf("gRPC over TLS: %v", err)
	}

	hc := &http.Client{Transport: &http.Transport{TLSClientConfig: &tls.Config{RootCAs: pool}}}
	defer hc.CloseIdleConnections()
	resp, err := hc.Post("https://"+ts.srv.Addrs().HTTP+"/v1/captures:analyze", "text/csv", strings.NewReader(goodCSV("tls", 20)))
	if err != nil {
		t.Fatal(err)
	}
	resp.Body.Close()
	if resp.StatusCode != 200 {
		t.Errorf("HTTPS analyze: %d", resp.StatusCode)
	}
	// Plain HTTP to the TLS port fails; metrics stay plain.
	if resp, err := http.Get("http://" + ts.srv.Addrs().HTTP + "/healthz"); err == nil {
		resp.Body.Close()
		if resp.StatusCode == 200 {
			t.Errorf("plain HTTP accepted on the TLS listener")
		}
	}
	mr, err := http.Get("http://" + ts.srv.Addrs().Metrics + "/metrics")
	if err != nil {
		t.Fatal(err)
	}
	mr.Body.Close()
	if mr.StatusCode != 200 {
		t.Errorf("metrics: %d", mr.StatusCode)
	}

	// A missing key file fails New.
	cfg = testConfig()
	cfg.TLSCertFile, cfg.TLSKeyFile = certFile, filepath.Join(t.TempDir(), "none.pem")
	if _, err := server.New(cfg, &fakeAnalyzer{}, nil, nil, nil); err == nil || !strings.Contains(err.Error(), "TLS") {
		t.Errorf("New with a missing key file: %v, want a TLS error", err)
	}
}
