// Package server runs kinchain as a network service: the gRPC
// KinematicsService (unary AnalyzeCapture and the StreamCapture protocol),
// standard gRPC health checking and reflection, a JSON/CSV HTTP gateway with
// the OpenAPI document and liveness/readiness probes, and Prometheus metrics
// on their own listener.
//
// Handlers only translate: requests go to an injected Analyzer (the engine)
// or to stream sessions made by an injected StreamFactory, and their errors
// are mapped to gRPC status codes (bad input: InvalidArgument with
// errdetails.BadRequest field violations; HTTP 400 through the gateway).
// Cross-cutting concerns — request ids, logging, metrics, panic recovery,
// concurrency limits and default deadlines — are interceptors on the gRPC
// side and the equivalent middleware on the HTTP side.
//
// Hardening (DEVELOPERS.md, Service: "Access control", "Limits", "Request
// decoding"): gRPC calls are admitted in the transport's tap before their
// message is read — bearer token (token file of SHA-256 digests,
// constant-time comparison, per-token rate limits), then a concurrency
// slot — so refused calls cost a header frame; requests are decoded by the
// server itself (wire.go) with limits checked on the wire before
// allocation; TLS with optional mutual TLS covers gRPC and HTTP; a
// production mode requires TLS and turns reflection off.
//
// A Server is built with New, which binds its listeners (so Addrs is valid at
// once, also for ":0"), and runs with Serve until its context is cancelled;
// Serve then drains: readiness and health go NOT_SERVING, open streams are
// told to finish, in-flight requests complete within Config.ShutdownGrace,
// and whatever is left is stopped hard.
package server
