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
// A Server is built with New, which binds its listeners (so Addrs is valid at
// once, also for ":0"), and runs with Serve until its context is cancelled;
// Serve then drains: readiness and health go NOT_SERVING, open streams are
// told to finish, in-flight requests complete within Config.ShutdownGrace,
// and whatever is left is stopped hard.
package server
