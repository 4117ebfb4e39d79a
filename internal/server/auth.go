package server

import (
	"bufio"
	"context"
	"crypto/sha256"
	"crypto/subtle"
	"crypto/tls"
	"crypto/x509"
	"encoding/hex"
	"errors"
	"fmt"
	"io"
	"log/slog"
	"math"
	"os"
	"strconv"
	"strings"
	"time"

	"golang.org/x/time/rate"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"
)

// Token is one entry of a token file: the SHA-256 digest of a bearer token
// (never the token itself), a name for logs and metrics, and an optional
// rate limit.
type Token struct {
	// Digest is SHA-256 of the token's bytes.
	Digest [sha256.Size]byte
	// Name identifies the token in logs ("auth.token") and in the
	// kinchain_rate_limited_total metric; default "line<N>".
	Name string
	// Rate is the token bucket's refill rate in requests per second; 0
	// means no limit.
	Rate float64
	// Burst is the bucket's size (requests that may come at once); default
	// max(1, ⌈Rate⌉). Unused when Rate is 0.
	Burst int
}

// HashToken returns the lower-case hex SHA-256 of a token, the form a token
// file lists (the same as `printf %s TOKEN | sha256sum`).
func HashToken(token string) string {
	d := sha256.Sum256([]byte(token))
	return hex.EncodeToString(d[:])
}

// maxTokenName bounds a token name's length.
const maxTokenName = 64

// ParseTokens reads a token file. The format, one token per line:
//
//	# comment lines and blank lines are ignored
//	SHA256HEX [NAME [RATE [BURST]]]
//
// separated by spaces or tabs, where SHA256HEX is the 64 hex digits of the
// SHA-256 of the token's bytes (`printf %s TOKEN | sha256sum`, or
// `kinchain serve -hash-token` reading the token on stdin); NAME is 1–64 of
// [A-Za-z0-9._-] (default "line<N>", its line number); RATE is requests per
// second allowed for the token, a decimal > 0, or "-" for no limit (the
// default); BURST is the bucket size, an integer ≥ 1 (default ⌈RATE⌉, at
// least 1). Digests and names must be unique. A file without any token is
// an error (it would lock every client out). Errors name the line.
func ParseTokens(r io.Reader) ([]Token, error) {
	var out []Token
	seenDigest := map[[sha256.Size]byte]int{}
	seenName := map[string]int{}
	sc := bufio.NewScanner(r)
	sc.Buffer(make([]byte, 0, 4096), 1<<16)
	for n := 1; sc.Scan(); n++ {
		line := strings.TrimSpace(sc.Text())
		if line == "" || strings.HasPrefix(line, "#") {
			continue
		}
		f := strings.Fields(line)
		if len(f) > 4 {
			return nil, fmt.Errorf("line %d: %d fields; want SHA256HEX [NAME [RATE [BURST]]]", n, len(f))
		}
		var t Token
		if len(f[0]) != 2*sha256.Size {
			return nil, fmt.Errorf("line %d: the digest has %d characters; want the 64 hex digits of a SHA-256", n, len(f[0]))
		}
		if _, err := hex.Decode(t.Digest[:], []byte(f[0])); err != nil {
			return nil, fmt.Errorf("line %d: the digest is not hex: %v", n, err)
		}
		t.Name = "line" + strconv.Itoa(n)
		if len(f) > 1 {
			t.Name = f[1]
			if !validTokenName(t.Name) {
				return nil, fmt.Errorf("line %d: name %q: want 1–%d of A-Z a-z 0-9 . _ -", n, t.Name, maxTokenName)
			}
		}
		if len(f) > 2 && f[2] != "-" {
			v, err := strconv.ParseFloat(f[2], 64)
			if err != nil || !(v > 0) || math.IsInf(v, 0) {
				return nil, fmt.Errorf("line %d: rate %q: want requests per second > 0, or -", n, f[2])
			}
			t.Rate = v
			t.Burst = max(1, int(math.Ceil(v)))
		}
		if len(f) > 3 {
			b, err := strconv.Atoi(f[3])
			if err != nil || b < 1 {
				return nil, fmt.Errorf("line %d: burst %q: want an integer ≥ 1", n, f[3])
			}
			if t.Rate == 0 {
				return nil, fmt.Errorf("line %d: a burst needs a rate", n)
			}
			t.Burst = b
		}
		if m, dup := seenDigest[t.Digest]; dup {
			return nil, fmt.Errorf("line %d: the same digest as line %d", n, m)
		}
		if m, dup := seenName[t.Name]; dup {
			return nil, fmt.Errorf("line %d: name %q already used on line %d", n, t.Name, m)
		}
		seenDigest[t.Digest], seenName[t.Name] = n, n
		out = append(out, t)
	}
	if err := sc.Err(); err != nil {
		return nil, err
	}
	if len(out) == 0 {
		return nil, errors.New("no tokens")
	}
	return out, nil
}

// LoadTokens reads the token file at path (see ParseTokens).
func LoadTokens(path string) ([]Token, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	ts, err := ParseTokens(f)
	if err != nil {
		return nil, fmt.Errorf("%s: %w", path, err)
	}
	return ts, nil
}

func validTokenName(s string) bool {
	if s == "" || len(s) > maxTokenName {
		return false
	}
	for i := 0; i < len(s); i++ {
		c := s[i]
		if !(c >= 'a' && c <= 'z' || c >= 'A' && c <= 'Z' || c >= '0' && c <= '9' || c == '.' || c == '_' || c == '-') {
			return false
		}
	}
	return true
}

// Reasons of kinchain_auth_failures_total: a fixed set, never anything the
// client sent.
const (
	authMissing       = "missing_token"       // no authorization header / metadata
	authMalformed     = "malformed_token"     // not "Bearer TOKEN"
	authUnknown       = "unknown_token"       // a token whose digest is not listed
	authNoClientCert  = "no_client_cert"      // mutual TLS: no certificate presented
	authBadClientCert = "invalid_client_cert" // mutual TLS: the certificate does not verify
)

var authReasons = []string{authMissing, authMalformed, authUnknown, authNoClientCert, authBadClientCert}

// unauthenticatedMessage is the one answer to every failed token check:
// missing, malformed and unknown tokens look the same to the client.
const unauthenticatedMessage = "missing or invalid bearer token"

// tokenSet checks bearer tokens against the digests of a token file and
// applies their rate limits. It is safe for concurrent use.
type tokenSet struct {
	tokens   []Token
	limiters []*rate.Limiter // nil: no limit
}

func newTokenSet(ts []Token) *tokenSet {
	s := &tokenSet{tokens: ts, limiters: make([]*rate.Limiter, len(ts))}
	for i, t := range ts {
		if t.Rate > 0 {
			s.limiters[i] = rate.NewLimiter(rate.Limit(t.Rate), t.Burst)
		}
	}
	return s
}

// check finds the token of an authorization value ("Bearer TOKEN"; the
// scheme in any case, RFC 6750 §2.1 and RFC 9110 §11.1). It returns the
// token's index, or -1 and the failure reason. Whatever the input, it
// hashes one string and compares the digest with every listed digest in
// constant time (crypto/subtle over fixed-length SHA-256 digests, no early
// exit), so the time taken does not tell a missing token from a wrong one,
// nor how close a guess came.
func (s *tokenSet) check(authz string) (int, string) {
	const scheme = "bearer "
	tok, reason := "", ""
	switch {
	case authz == "":
		reason = authMissing
	case len(authz) > len(scheme) && strings.EqualFold(authz[:len(scheme)], scheme):
		tok = strings.TrimSpace(authz[len(scheme):])
		if tok == "" {
			reason = authMalformed
		}
	default:
		reason = authMalformed
	}
	d := sha256.Sum256([]byte(tok))
	found, idx := 0, 0
	for i := range s.tokens {
		eq := subtle.ConstantTimeCompare(d[:], s.tokens[i].Digest[:])
		idx = subtle.ConstantTimeSelect(eq, i, idx)
		found |= eq
	}
	if reason != "" {
		return -1, reason
	}
	if found == 0 {
		return -1, authUnknown
	}
	return idx, ""
}

// retryHint is the retry delay to suggest to a token over its rate: the
// time for one request's worth of refill, at least one second.
func (t Token) retryHint() time.Duration {
	if t.Rate <= 0 {
		return retryAfter
	}
	return max(retryAfter, time.Duration(math.Ceil(1/t.Rate))*time.Second)
}

type principalKey struct{}

// principalFrom returns the name of the token a call was authenticated
// with, or "".
func principalFrom(ctx context.Context) string {
	n, _ := ctx.Value(principalKey{}).(string)
	return n
}

// authorize checks an authorization value when tokens are configured and
// applies the token's rate limit. It returns the context with the token's
// name, or UNAUTHENTICATED (always the same message) or RESOURCE_EXHAUSTED
// with a retry hint. transport labels the failure metrics.
func (s *Server) authorize(ctx context.Context, transport, authz string) (context.Context, error) {
	if s.tokens == nil {
		return ctx, nil
	}
	i, reason := s.tokens.check(authz)
	if i < 0 {
		s.metrics.authFailures.WithLabelValues(transport, reason).Inc()
		return ctx, status.Error(codes.Unauthenticated, unauthenticatedMessage)
	}
	t := s.tokens.tokens[i]
	if l := s.tokens.limiters[i]; l != nil && !l.Allow() {
		s.metrics.rateLimited.WithLabelValues(t.Name).Inc()
		return ctx, resourceExhausted(t.retryHint(), "token %q is over its rate limit of %g requests/s (burst %d); retry later", t.Name, t.Rate, t.Burst)
	}
	return context.WithValue(ctx, principalKey{}, t.Name), nil
}

// tlsSetup holds what New loaded for TLS: the server certificate (renewed
// from its files while serving, certs.go) and, for mutual TLS, the client
// CA pool.
type tlsSetup struct {
	certs     *certReloader
	clientCAs *x509.CertPool
}

func loadTLS(cfg Config, m *metrics, log *slog.Logger) (*tlsSetup, error) {
	if !cfg.TLS() {
		return nil, nil
	}
	certs, err := newCertReloader(cfg.TLSCertFile, cfg.TLSKeyFile, m, log)
	if err != nil {
		return nil, fmt.Errorf("server TLS: %w", err)
	}
	ts := &tlsSetup{certs: certs}
	if cfg.TLSClientCAFile != "" {
		pem, err := os.ReadFile(cfg.TLSClientCAFile)
		if err != nil {
			return nil, fmt.Errorf("server TLS client CA: %w", err)
		}
		ts.clientCAs = x509.NewCertPool()
		if !ts.clientCAs.AppendCertsFromPEM(pem) {
			return nil, fmt.Errorf("server TLS client CA: %s holds no PEM certificate", cfg.TLSClientCAFile)
		}
	}
	return ts, nil
}

// config returns the tls.Config of one listener. With a client CA the
// server asks for a client certificate and verifies it itself in
// VerifyConnection — the same x509 verification crypto/tls does for
// RequireAndVerifyClientCert (roots: the client CAs, the rest of the
// client's chain as intermediates, extended key usage clientAuth) — so
// that a failure can be counted by reason before the handshake fails.
func (ts *tlsSetup) config(m *metrics, transport string) *tls.Config {
	c := &tls.Config{GetCertificate: ts.certs.get, MinVersion: tls.VersionTLS12}
	if ts.clientCAs == nil {
		return c
	}
	c.ClientCAs = ts.clientCAs // listed in the CertificateRequest
	c.ClientAuth = tls.RequestClientCert
	pool := ts.clientCAs
	c.VerifyConnection = func(cs tls.ConnectionState) error {
		if len(cs.PeerCertificates) == 0 {
			m.authFailures.WithLabelValues(transport, authNoClientCert).Inc()
			return errors.New("tls: a client certificate is required")
		}
		inter := x509.NewCertPool()
		for _, c := range cs.PeerCertificates[1:] {
			inter.AddCert(c)
		}
		_, err := cs.PeerCertificates[0].Verify(x509.VerifyOptions{
			Roots:         pool,
			Intermediates: inter,
			KeyUsages:     []x509.ExtKeyUsage{x509.ExtKeyUsageClientAuth},
		})
		if err != nil {
			m.authFailures.WithLabelValues(transport, authBadClientCert).Inc()
			return fmt.Errorf("tls: client certificate: %w", err)
		}
		return nil
	}
	return c
}
