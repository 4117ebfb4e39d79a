package server

import (
	"crypto/tls"
	"fmt"
	"log/slog"
	"os"
	"path/filepath"
	"sync"
	"time"
)

// Renewing the server certificate without a restart.
//
// Certificates are short-lived where they are issued automatically, and a
// Kubernetes Secret mounted as a volume is updated in place when its
// issuer renews it. The server therefore serves its key pair through
// tls.Config.GetCertificate: at most every certCheckInterval, on a
// handshake, it looks at the two files' modification times and sizes and,
// when either changed, loads the pair again. A pair that does not load
// (half written, a key that does not match) is logged and counted once
// per change of the files, and the previous certificate stays in use
// until they change again and load. Connections
// keep the certificate they were opened with. The client CA file for
// mutual TLS is still read once, at start.
//
// Metrics: kinchain_tls_certificate_reloads_total{result="ok"|"error"}
// and kinchain_tls_certificate_expiry_timestamp_seconds{cert_file}, the
// served leaf's NotAfter, for an alert well before it passes.

// certCheckInterval is how often, at most, the key pair files are looked
// at for a renewal.
var certCheckInterval = 10 * time.Second

// certReloader serves the key pair of certFile and keyFile.
type certReloader struct {
	certFile, keyFile string
	m                 *metrics
	log               *slog.Logger

	mu     sync.Mutex
	cert   *tls.Certificate
	stamp  [2]fileStamp // of certFile and keyFile when cert was loaded
	failed [2]fileStamp // of the files when they last failed to load
	next   time.Time    // when to look at the files again
}

// fileStamp is what tells a file changed: its modification time (Unix
// nanoseconds) and size.
type fileStamp struct {
	mod, size int64
}

func stamps(files ...string) ([2]fileStamp, error) {
	var st [2]fileStamp
	for i, f := range files {
		fi, err := os.Stat(f) // follows the symbolic links of a Secret volume
		if err != nil {
			return st, err
		}
		st[i] = fileStamp{fi.ModTime().UnixNano(), fi.Size()}
	}
	return st, nil
}

// newCertReloader loads the pair once; an error here fails New.
func newCertReloader(certFile, keyFile string, m *metrics, log *slog.Logger) (*certReloader, error) {
	r := &certReloader{certFile: certFile, keyFile: keyFile, m: m, log: log}
	st, err := stamps(certFile, keyFile)
	if err != nil {
		return nil, err
	}
	cert, err := tls.LoadX509KeyPair(certFile, keyFile)
	if err != nil {
		return nil, err
	}
	r.set(&cert, st)
	for _, v := range []string{reloadOK, reloadError} {
		m.tlsReloads.WithLabelValues(v)
	}
	return r, nil
}

// set makes cert the served certificate.
func (r *certReloader) set(cert *tls.Certificate, st [2]fileStamp) {
	r.cert, r.stamp = cert, st
	r.next = time.Now().Add(certCheckInterval)
	if cert.Leaf != nil { // LoadX509KeyPair parses the leaf (Go 1.23 on)
		r.m.tlsExpiry.WithLabelValues(filepath.Base(r.certFile)).Set(float64(cert.Leaf.NotAfter.Unix()))
	}
}

// get is the tls.Config GetCertificate callback.
func (r *certReloader) get(*tls.ClientHelloInfo) (*tls.Certificate, error) {
	r.mu.Lock()
	defer r.mu.Unlock()
	if now := time.Now(); now.After(r.next) {
		r.next = now.Add(certCheckInterval)
		r.reload()
	}
	return r.cert, nil
}

// reload loads the pair again when the files changed since the last load.
func (r *certReloader) reload() {
	st, err := stamps(r.certFile, r.keyFile)
	if err == nil && (st == r.stamp || st == r.failed) {
		return // unchanged, or the same broken files as last time
	}
	var cert tls.Certificate
	if err == nil {
		cert, err = tls.LoadX509KeyPair(r.certFile, r.keyFile)
	}
	if err != nil {
		r.failed = st
		r.m.tlsReloads.WithLabelValues(reloadError).Inc()
		r.log.Warn("TLS key pair changed but does not load; still serving the previous certificate",
			slog.String("cert_file", r.certFile), slog.String("key_file", r.keyFile), slog.String("error", err.Error()))
		return
	}
	r.set(&cert, st)
	r.m.tlsReloads.WithLabelValues(reloadOK).Inc()
	attrs := []any{slog.String("cert_file", r.certFile)}
	if cert.Leaf != nil {
		attrs = append(attrs, slog.String("subject", cert.Leaf.Subject.String()),
			slog.Time("not_after", cert.Leaf.NotAfter), slog.String("serial", fmt.Sprint(cert.Leaf.SerialNumber)))
	}
	r.log.Info("TLS certificate reloaded", attrs...)
}

// Values of the result label of kinchain_tls_certificate_reloads_total.
const (
	reloadOK    = "ok"
	reloadError = "error"
)
