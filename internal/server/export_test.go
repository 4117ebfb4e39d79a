package server

import (
	"context"
	"time"
)

// GatewayMarshaler exposes the gateway's marshaler to the external tests
// (the benchmark's loopback gateway uses the same one).
var GatewayMarshaler = gatewayMarshaler

// CheckTokenForTest runs the token check of a request with the given
// authorization value (for the timing benchmark).
func CheckTokenForTest(s *Server, authz string) error {
	_, err := s.authorize(context.Background(), transportHTTP, authz)
	return err
}

// SetCertCheckIntervalForTest sets how often the TLS key pair files are
// looked at, and returns a function restoring the previous value.
func SetCertCheckIntervalForTest(d time.Duration) func() {
	old := certCheckInterval
	certCheckInterval = d
	return func() { certCheckInterval = old }
}
