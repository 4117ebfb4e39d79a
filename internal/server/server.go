package server

import (
	"context"
	"crypto/tls"
	"errors"
	"fmt"
	"log/slog"
	"net"
	"net/http"
	"sync"
	"sync/atomic"
	"time"

	"github.com/grpc-ecosystem/grpc-gateway/v2/runtime"
	"github.com/prometheus/client_golang/prometheus"
	"github.com/prometheus/client_golang/prometheus/promhttp"
	"google.golang.org/grpc"
	"google.golang.org/grpc/credentials"
	"google.golang.org/grpc/health"
	healthpb "google.golang.org/grpc/health/grpc_health_v1"
	"google.golang.org/grpc/keepalive"
	"google.golang.org/grpc/reflection"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/validate"
)

// Keepalive policy. Clients may ping every keepaliveMinTime (the client
// package pings every 30 s); the server pings idle connections itself
// every serverPingTime and drops them after serverPingTimeout without an
// answer.
const (
	keepaliveMinTime  = 10 * time.Second
	serverPingTime    = 2 * time.Minute
	serverPingTimeout = 20 * time.Second
)

// HTTP/2 flow control and buffers for large messages; the same values are
// in api/client.
const (
	streamWindow = 4 << 20
	connWindow   = 16 << 20
	socketBuffer = 256 << 10
)

// Server is kinchain's network service. Create it with New, run it with
// Serve.
type Server struct {
	cfg      Config
	log      *slog.Logger
	analyzer Analyzer
	streams  StreamFactory
	reg      *prometheus.Registry
	metrics  *metrics
	limits   *limiter
	tokens   *tokenSet       // nil: no token authentication
	lim      validate.Limits // the analyzer's limits, for decoding
	svc      *service

	grpc    *grpc.Server
	health  *health.Server
	httpMux *http.ServeMux
	gw      *runtime.ServeMux
	allowMu sync.Mutex
	allow   map[string][]string // path → methods, for 405 answers

	httpSrv, metricsSrv, healthSrv          *http.Server
	grpcLis, httpLis, metricsLis, healthLis net.Listener

	ready    atomic.Bool
	draining chan struct{}
	served   atomic.Bool
}

// Addrs are the addresses a Server listens on; empty when disabled.
type Addrs struct {
	GRPC, HTTP, Metrics, Health string
}

// New builds a Server and binds its listeners, so Addrs reports the real
// ports at once (also for ":0"). a analyses captures; streams opens
// stream sessions (nil: StreamCapture answers UNIMPLEMENTED); reg receives
// the metrics and is served at /metrics (nil: a new registry); log receives
// the JSON request log (nil: slog.Default()). Call Serve to run it; when New
// fails it has closed whatever it bound.
func New(cfg Config, a Analyzer, streams StreamFactory, reg *prometheus.Registry, log *slog.Logger) (*Server, error) {
	if err := cfg.Validate(); err != nil {
		return nil, fmt.Errorf("server config: %w", err)
	}
	if a == nil {
		return nil, errors.New("server: nil Analyzer")
	}
	if reg == nil {
		reg = prometheus.NewRegistry()
	}
	if log == nil {
		log = slog.Default()
	}
	m, err := newMetrics(reg)
	if err != nil {
		return nil, fmt.Errorf("server metrics: %w", err)
	}
	s := &Server{
		cfg: cfg, log: log, analyzer: a, streams: streams, reg: reg, metrics: m,
		limits:   newLimiter(cfg.MaxConcurrentRequests, cfg.MaxConcurrentStreams),
		lim:      limitsOf(a),
		draining: make(chan struct{}),
	}
	s.svc = &service{s: s}
	if cfg.TokenFile != "" {
		ts, err := LoadTokens(cfg.TokenFile)
		if err != nil {
			return nil, fmt.Errorf("server token file: %w", err)
		}
		s.tokens = newTokenSet(ts)
		for _, t := range ts {
			m.rateLimited.WithLabelValues(t.Name)
		}
	}

	tlsSet, err := loadTLS(cfg, m, log)
	if err != nil {
		return nil, err
	}

	opts := []grpc.ServerOption{
		grpc.MaxRecvMsgSize(cfg.MaxRecvMsgBytes),
		grpc.MaxSendMsgSize(cfg.MaxSendMsgBytes),
		// Captures are large messages: fixed flow-control windows (instead
		// of BDP estimation starting at 64 KiB) and larger socket buffers
		// cut window updates and syscalls per call (DEVELOPERS.md,
		// Performance, "Service").
		grpc.InitialWindowSize(streamWindow),
		grpc.InitialConnWindowSize(connWindow),
		grpc.ReadBufferSize(socketBuffer),
		grpc.WriteBufferSize(socketBuffer),
		grpc.KeepaliveEnforcementPolicy(keepalive.EnforcementPolicy{MinTime: keepaliveMinTime, PermitWithoutStream: true}),
		grpc.KeepaliveParams(keepalive.ServerParameters{
			Time:                  serverPingTime,
			Timeout:               serverPingTimeout,
			MaxConnectionAge:      cfg.MaxConnectionAge,
			MaxConnectionAgeGrace: cfg.MaxStreamDuration,
		}),
	}
	if tlsSet != nil {
		opts = append(opts, grpc.Creds(credentials.NewTLS(tlsSet.config(m, transportGRPC))))
	}
	// Admission before the message is read; requests decoded by the
	// server itself (wire.go).
	opts = append(opts, grpc.InTapHandle(s.tap), grpc.ForceServerCodecV2(newRawCodec()))
	opts = append(opts, s.interceptors()...)
	s.grpc = grpc.NewServer(opts...)
	s.grpc.RegisterService(s.serviceDesc(), s.svc)
	s.health = health.NewServer()
	healthpb.RegisterHealthServer(s.grpc, s.health)
	s.health.SetServingStatus("", healthpb.HealthCheckResponse_NOT_SERVING)
	s.health.SetServingStatus(kinchainv1.KinematicsService_ServiceDesc.ServiceName, healthpb.HealthCheckResponse_NOT_SERVING)
	if cfg.Reflection {
		reflection.Register(s.grpc)
	}

	if err := s.newHTTPHandler(); err != nil {
		return nil, err
	}

	// Bind last, closing what was bound when a later bind fails.
	fail := func(err error) (*Server, error) {
		for _, l := range []net.Listener{s.grpcLis, s.httpLis, s.metricsLis, s.healthLis} {
			if l != nil {
				_ = l.Close()
			}
		}
		return nil, err
	}
	if s.grpcLis, err = listen(cfg.GRPCListener, cfg.GRPCAddr, "gRPC"); err != nil {
		return fail(err)
	}
	if cfg.HTTPListener != nil || cfg.HTTPAddr != "" {
		if s.httpLis, err = listen(cfg.HTTPListener, cfg.HTTPAddr, "HTTP"); err != nil {
			return fail(err)
		}
		if tlsSet != nil {
			s.httpLis = tls.NewListener(s.httpLis, tlsSet.config(m, transportHTTP))
		}
		s.httpSrv = &http.Server{
			Handler:           s.httpMux,
			ReadHeaderTimeout: 10 * time.Second,
			IdleTimeout:       2 * time.Minute,
			MaxHeaderBytes:    64 << 10,
			ErrorLog:          slog.NewLogLogger(log.Handler(), slog.LevelWarn),
		}
	}
	if cfg.MetricsListener != nil || cfg.MetricsAddr != "" {
		if s.metricsLis, err = listen(cfg.MetricsListener, cfg.MetricsAddr, "metrics"); err != nil {
			return fail(err)
		}
		mm := http.NewServeMux()
		mm.Handle("GET /metrics", promhttp.HandlerFor(reg, promhttp.HandlerOpts{
			ErrorLog:      slog.NewLogLogger(log.Handler(), slog.LevelWarn),
			ErrorHandling: promhttp.ContinueOnError,
		}))
		s.metricsSrv = &http.Server{
			Handler:           mm,
			ReadHeaderTimeout: 10 * time.Second,
			ErrorLog:          slog.NewLogLogger(log.Handler(), slog.LevelWarn),
		}
	}
	if cfg.HealthListener != nil || cfg.HealthAddr != "" {
		if s.healthLis, err = listen(cfg.HealthListener, cfg.HealthAddr, "health"); err != nil {
			return fail(err)
		}
		s.healthSrv = &http.Server{
			Handler:           s.healthMux(),
			ReadHeaderTimeout: 10 * time.Second,
			ErrorLog:          slog.NewLogLogger(log.Handler(), slog.LevelWarn),
		}
	}
	return s, nil
}

func listen(l net.Listener, addr, what string) (net.Listener, error) {
	if l != nil {
		return l, nil
	}
	l, err := net.Listen("tcp", addr)
	if err != nil {
		return nil, fmt.Errorf("%s listener: %w", what, err)
	}
	return l, nil
}

// Addrs returns the bound addresses.
func (s *Server) Addrs() Addrs {
	var a Addrs
	if s.grpcLis != nil {
		a.GRPC = s.grpcLis.Addr().String()
	}
	if s.httpLis != nil {
		a.HTTP = s.httpLis.Addr().String()
	}
	if s.metricsLis != nil {
		a.Metrics = s.metricsLis.Addr().String()
	}
	if s.healthLis != nil {
		a.Health = s.healthLis.Addr().String()
	}
	return a
}

// Config returns the server's configuration.
func (s *Server) Config() Config { return s.cfg }

// Registry returns the registry the metrics are on.
func (s *Server) Registry() *prometheus.Registry { return s.reg }

// Serve serves until ctx is cancelled, then shuts down gracefully:
//
//  1. /readyz answers 503 and gRPC health reports NOT_SERVING (overall and
//     for kinchain.v1.KinematicsService); serving goes on for
//     Config.ShutdownDelay so that load balancers notice;
//  2. open streams are told to finish (they flush their reports and
//     summary and end with UNAVAILABLE); the gRPC server stops accepting
//     (GOAWAY) and the HTTP server closes its listener and idle
//     connections, while in-flight requests run to completion;
//  3. after Config.ShutdownGrace whatever is still running is stopped hard
//     (connections closed);
//  4. the health and metrics listeners are closed last.
//
// Serve returns nil after a shutdown asked for by ctx, or the error of a
// listener that failed (after shutting the rest down). It may be called
// once.
func (s *Server) Serve(ctx context.Context) error {
	if !s.served.CompareAndSwap(false, true) {
		return errors.New("server: Serve called twice")
	}
	type result struct {
		what string
		err  error
	}
	errc := make(chan result, 4)
	var wg sync.WaitGroup
	run := func(what string, f func() error) {
		wg.Add(1)
		go func() {
			defer wg.Done()
			err := f()
			if errors.Is(err, http.ErrServerClosed) || errors.Is(err, grpc.ErrServerStopped) {
				err = nil
			}
			errc <- result{what, err}
		}()
	}
	run("gRPC", func() error { return s.grpc.Serve(s.grpcLis) })
	if s.httpSrv != nil {
		run("HTTP", func() error { return s.httpSrv.Serve(s.httpLis) })
	}
	if s.metricsSrv != nil {
		run("metrics", func() error { return s.metricsSrv.Serve(s.metricsLis) })
	}
	if s.healthSrv != nil {
		run("health", func() error { return s.healthSrv.Serve(s.healthLis) })
	}
	s.health.SetServingStatus("", healthpb.HealthCheckResponse_SERVING)
	s.health.SetServingStatus(kinchainv1.KinematicsService_ServiceDesc.ServiceName, healthpb.HealthCheckResponse_SERVING)
	s.ready.Store(true)
	a := s.Addrs()
	s.log.Info("serving", slog.String("grpc_addr", a.GRPC), slog.String("http_addr", a.HTTP), slog.String("metrics_addr", a.Metrics), slog.String("health_addr", a.Health))

	var failed error
	select {
	case <-ctx.Done():
	case r := <-errc:
		// A listener stopped on its own: shut the rest down and report it.
		failed = fmt.Errorf("%s server: %w", r.what, r.err)
		if r.err == nil {
			failed = fmt.Errorf("%s server stopped unexpectedly", r.what)
		}
		s.log.Error("listener failed; shutting down", slog.String("error", failed.Error()))
	}
	s.shutdown()
	wg.Wait()
	close(errc)
	for r := range errc {
		if r.err != nil && failed == nil {
			failed = fmt.Errorf("%s server: %w", r.what, r.err)
		}
	}
	return failed
}

// shutdown runs the drain sequence documented on Serve.
func (s *Server) shutdown() {
	start := time.Now()
	s.ready.Store(false)
	s.health.Shutdown() // NOT_SERVING for every service, now and for later updates
	s.log.Info("draining", slog.String("shutdown_delay", s.cfg.ShutdownDelay.String()), slog.String("shutdown_grace", s.cfg.ShutdownGrace.String()))
	if s.cfg.ShutdownDelay > 0 {
		time.Sleep(s.cfg.ShutdownDelay)
	}
	close(s.draining)

	grace, cancel := context.WithTimeout(context.Background(), s.cfg.ShutdownGrace)
	defer cancel()
	hard := atomic.Bool{}
	var wg sync.WaitGroup
	wg.Add(1)
	go func() {
		defer wg.Done()
		done := make(chan struct{})
		go func() { s.grpc.GracefulStop(); close(done) }()
		select {
		case <-done:
		case <-grace.Done():
			hard.Store(true)
			s.grpc.Stop()
			<-done
		}
	}()
	if s.httpSrv != nil {
		wg.Add(1)
		go func() {
			defer wg.Done()
			if err := s.httpSrv.Shutdown(grace); err != nil {
				hard.Store(true)
				_ = s.httpSrv.Close()
			}
		}()
	}
	wg.Wait()
	for _, srv := range []*http.Server{s.healthSrv, s.metricsSrv} {
		if srv == nil {
			continue
		}
		ctx, cancel := context.WithTimeout(context.Background(), time.Second)
		if err := srv.Shutdown(ctx); err != nil {
			_ = srv.Close()
		}
		cancel()
	}
	s.log.Info("stopped", slog.Bool("forced", hard.Load()), slog.Float64("drain_s", time.Since(start).Seconds()))
}
