package server

// GatewayMarshaler exposes the gateway's marshaler to the external tests
// (the benchmark's loopback gateway uses the same one).
var GatewayMarshaler = gatewayMarshaler
