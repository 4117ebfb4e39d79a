package server

import "context"

// GatewayMarshaler exposes the gateway's marshaler to the external tests
// (the benchmark's loopback gateway uses the same one).
var GatewayMarshaler = gatewayMarshaler

// CheckTokenForTest runs the token check of a request with the given
// authorization value (for the timing benchmark).
func CheckTokenForTest(s *Server, authz string) error {
	_, err := s.authorize(context.Background(), transportHTTP, authz)
	return err
}
