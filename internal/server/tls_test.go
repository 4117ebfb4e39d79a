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
	key, err := ecdsa.GenerateKey(elliptic.P256(), rand.Reader)
	if err != nil {
		t.Fatal(err)
	}
	tmpl := &x509.Certificate{
		SerialNumber: big.NewInt(1),
		Subject:      pkix.Name{CommonName: "kinchain test"},
		IPAddresses:  []net.IP{net.ParseIP("127.0.0.1")},
		NotBefore:    time.Now().Add(-time.Hour),
		NotAfter:     time.Now().Add(time.Hour),
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
	dir := t.TempDir()
	certFile, keyFile = filepath.Join(dir, "cert.pem"), filepath.Join(dir, "key.pem")
	if err := os.WriteFile(certFile, pem.EncodeToMemory(&pem.Block{Type: "CERTIFICATE", Bytes: der}), 0o600); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(keyFile, pem.EncodeToMemory(&pem.Block{Type: "EC PRIVATE KEY", Bytes: kb}), 0o600); err != nil {
		t.Fatal(err)
	}
	cert, _ := x509.ParseCertificate(der)
	pool = x509.NewCertPool()
	pool.AddCert(cert)
	return certFile, keyFile, pool
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
