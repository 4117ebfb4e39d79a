package cli

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"io"
	"log/slog"
	"os"
	"os/signal"
	"sort"
	"strconv"
	"strings"
	"syscall"

	"github.com/prometheus/client_golang/prometheus"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/engine"
	"github.com/kinchain/kinchain/internal/plot"
	"github.com/kinchain/kinchain/internal/server"
	"github.com/kinchain/kinchain/internal/stream"
	"github.com/kinchain/kinchain/internal/version"
)

// envPrefix starts the environment variable of every serve flag: the flag
// name upper-cased with '-' as '_' (-grpc-addr ↔ KINCHAIN_GRPC_ADDR).
const envPrefix = "KINCHAIN_"

// RunServe implements `kinchain serve`: the gRPC service, the JSON/CSV
// gateway and the metrics listener, until SIGTERM or SIGINT (or ctx) stops
// it; then it drains gracefully. A second signal during the drain stops the
// process at once (Go's default signal behaviour is restored).
//
// Every flag can also be set by an environment variable (see envName);
// a flag given on the command line wins. The effective configuration is
// logged at start as one JSON line on stderr, like every log line.
//
// `kinchain serve -hash-token` does not serve: it reads one token from
// stdin (up to the first newline) and prints the line a token file takes
// for it (its SHA-256 in hex).
func RunServe(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	if hashTokenRequested(args) {
		return hashToken(os.Stdin, stdout)
	}
	return runServe(ctx, args, os.LookupEnv, stderr, nil)
}

// serveFlags holds the parsed serve command line.
type serveFlags struct {
	cfg       server.Config
	logLevel  slog.Level
	hashToken bool
}

// hashTokenRequested reports whether args ask for -hash-token (alone: it
// takes no other flag).
func hashTokenRequested(args []string) bool {
	for _, a := range args {
		if a == "-hash-token" || a == "--hash-token" || a == "-hash-token=true" || a == "--hash-token=true" {
			return true
		}
	}
	return false
}

// hashToken reads a token (the first line of r, without its line end) and
// writes its SHA-256 in hex, as a token file lists it.
func hashToken(r io.Reader, w io.Writer) error {
	b, err := io.ReadAll(io.LimitReader(r, 1<<16))
	if err != nil {
		return err
	}
	tok, _, _ := strings.Cut(string(b), "\n")
	tok = strings.TrimSuffix(tok, "\r")
	if tok == "" {
		return usagef("-hash-token: no token on stdin (send it without a trailing space, e.g. printf %%s \"$TOKEN\" | kinchain serve -hash-token)")
	}
	_, err = fmt.Fprintln(w, server.HashToken(tok))
	return err
}

// newServeFlagSet registers the serve flags on one FlagSet writing into f.
func newServeFlagSet(f *serveFlags, stderr io.Writer) *flag.FlagSet {
	f.cfg = server.DefaultConfig()
	c := &f.cfg
	fs := flag.NewFlagSet("serve", flag.ContinueOnError)
	fs.SetOutput(stderr)
	fs.Usage = func() {
		fmt.Fprintf(stderr, "Usage: kinchain serve [flags]\n\n"+
			"Serves gRPC on %s, the JSON/CSV gateway on %s and Prometheus metrics on %s by default.\n"+
			"Every flag can be set by an environment variable: %s<FLAG NAME, upper case, - as _>\n"+
			"(e.g. -grpc-addr ↔ %sGRPC_ADDR); flags win. Sizes take B, KiB, MiB or GiB.\n\nFlags:\n",
			server.DefaultGRPCAddr, server.DefaultHTTPAddr, server.DefaultMetricsAddr, envPrefix, envPrefix)
		fs.PrintDefaults()
	}
	fs.StringVar(&c.GRPCAddr, "grpc-addr", c.GRPCAddr, "gRPC listen address")
	fs.StringVar(&c.HTTPAddr, "http-addr", c.HTTPAddr, "HTTP gateway listen address (JSON and CSV analysis, /openapi.json, /healthz, /readyz); empty disables")
	fs.StringVar(&c.MetricsAddr, "metrics-addr", c.MetricsAddr, "Prometheus /metrics listen address; empty disables")
	fs.StringVar(&c.HealthAddr, "health-addr", c.HealthAddr, "extra plain-HTTP listener for /healthz and /readyz only (no TLS, no token); empty disables")
	fs.StringVar(&c.TLSCertFile, "tls-cert", "", "PEM certificate file; with -tls-key turns on TLS for gRPC and HTTP (metrics and health listeners stay plain)")
	fs.StringVar(&c.TLSKeyFile, "tls-key", "", "PEM private key file for -tls-cert")
	fs.StringVar(&c.TLSClientCAFile, "tls-client-ca", "", "PEM file of client CAs: turns on mutual TLS (clients must present a certificate signed by one); needs -tls-cert")
	fs.StringVar(&c.TokenFile, "token-file", "", "file of bearer token SHA-256 hashes (lines: SHA256HEX [NAME [RATE/s [BURST]]]); turns on token auth for everything but /healthz, /readyz and gRPC health")
	fs.BoolVar(&f.hashToken, "hash-token", false, "read a token on stdin, print its SHA-256 for the token file, and exit")
	fs.BoolVar(&c.Production, "production", c.Production, "production mode: requires TLS and turns reflection off (an explicit -reflection=true is an error)")
	fs.BoolVar(&c.Reflection, "reflection", c.Reflection, "register gRPC server reflection (default off with -production)")
	fs.Var((*byteSize)(&c.MaxRecvMsgBytes), "max-recv-bytes", "largest gRPC message or HTTP body accepted (gRPC RESOURCE_EXHAUSTED, HTTP 413 beyond)")
	fs.Var((*byteSize)(&c.MaxSendMsgBytes), "max-send-bytes", "largest gRPC message sent")
	fs.IntVar(&c.MaxConcurrentRequests, "max-requests", c.MaxConcurrentRequests, "analyses running at once, gRPC and HTTP together; more are refused at once with RESOURCE_EXHAUSTED / 429")
	fs.IntVar(&c.MaxConcurrentStreams, "max-streams", c.MaxConcurrentStreams, "StreamCapture calls open at once; more are refused with RESOURCE_EXHAUSTED")
	fs.DurationVar(&c.RequestTimeout, "request-timeout", c.RequestTimeout, "deadline of a request that arrives without one")
	fs.DurationVar(&c.MaxStreamDuration, "max-stream-duration", c.MaxStreamDuration, "longest a stream may stay open")
	fs.DurationVar(&c.StreamIdleTimeout, "stream-idle-timeout", c.StreamIdleTimeout, "a stream sending nothing for this long is ended")
	fs.DurationVar(&c.MaxConnectionAge, "max-connection-age", c.MaxConnectionAge, "close gRPC connections after about this age so clients rebalance; 0 never")
	fs.DurationVar(&c.ShutdownDelay, "shutdown-delay", c.ShutdownDelay, "on SIGTERM, keep serving this long while reporting not ready")
	fs.DurationVar(&c.ShutdownGrace, "shutdown-grace", c.ShutdownGrace, "on SIGTERM, time for in-flight requests and streams to finish before a hard stop")
	fs.Var((*logLevel)(&f.logLevel), "log-level", "log level: debug, info, warn or error")
	return fs
}

// envName is the environment variable of a flag.
func envName(flagName string) string {
	return envPrefix + strings.ToUpper(strings.ReplaceAll(flagName, "-", "_"))
}

// parseServe parses args, then sets every flag not given on the command
// line from its environment variable when that is set. Errors name the
// flag or the variable.
func parseServe(args []string, lookupEnv func(string) (string, bool), stderr io.Writer) (*serveFlags, error) {
	f := &serveFlags{}
	fs := newServeFlagSet(f, stderr)
	pos, err := parseArgs(fs, args)
	if err != nil {
		return nil, err
	}
	if len(pos) > 0 {
		return nil, usagef("serve takes no positional arguments (got %q)", strings.Join(pos, " "))
	}
	given := map[string]bool{}
	fs.Visit(func(fl *flag.Flag) { given[fl.Name] = true })
	var names []string
	fs.VisitAll(func(fl *flag.Flag) { names = append(names, fl.Name) })
	sort.Strings(names)
	for _, name := range names {
		if given[name] || name == "hash-token" {
			continue
		}
		v, ok := lookupEnv(envName(name))
		if !ok {
			continue
		}
		if err := fs.Set(name, v); err != nil {
			return nil, usagef("%s=%q: %v", envName(name), v, err)
		}
	}
	// Production mode turns reflection off unless it was asked for, which
	// Validate then refuses.
	if f.cfg.Production && !given["reflection"] {
		if _, set := lookupEnv(envName("reflection")); !set {
			f.cfg.Reflection = false
		}
	}
	if f.hashToken {
		return nil, usagef("-hash-token: give it as -hash-token, alone")
	}
	if err := f.cfg.Validate(); err != nil {
		return nil, usagef("%v", err)
	}
	return f, nil
}

// runServe is RunServe with the environment and a start hook injectable
// (the hook sees the server once its listeners are bound).
func runServe(ctx context.Context, args []string, lookupEnv func(string) (string, bool), stderr io.Writer, started func(*server.Server)) error {
	f, err := parseServe(args, lookupEnv, stderr)
	if err != nil {
		return err
	}
	log := slog.New(slog.NewJSONHandler(stderr, &slog.HandlerOptions{Level: f.logLevel}))

	ctx, stop := signal.NotifyContext(ctx, os.Interrupt, syscall.SIGTERM)
	defer stop()
	go func() {
		<-ctx.Done()
		stop() // a second signal now terminates the process
	}()

	eng := engine.New(engine.Config{})
	streams := func(h *kinchainv1.StreamHeader) (server.StreamSession, error) {
		s, err := stream.NewSession(h, stream.Limits{})
		if err != nil {
			return nil, err // never a typed nil in the interface
		}
		return s, nil
	}
	srv, err := server.New(f.cfg, eng, streams, prometheus.NewRegistry(), log)
	if err != nil {
		return err
	}
	srv.HandleHTTP("POST /v1/captures:plot", plot.Handler(eng, plot.HandlerConfig{
		MaxBodyBytes: int64(f.cfg.MaxRecvMsgBytes),
		QueryOptions: server.QueryOptions, // same option syntax as :analyze
		WriteError:   srv.WriteHTTPError,  // same error JSON and status mapping
	}))
	a := srv.Addrs()
	log.Info("kinchain serve starting",
		slog.String("version", version.Version), slog.String("commit", version.Commit),
		slog.String("log_level", f.logLevel.String()),
		slog.Any("config", f.cfg),
		slog.Group("bound", slog.String("grpc", a.GRPC), slog.String("http", a.HTTP), slog.String("metrics", a.Metrics), slog.String("health", a.Health)))
	if started != nil {
		started(srv)
	}
	return srv.Serve(ctx)
}

// byteSize is an int flag of bytes that accepts the suffixes B, KiB, MiB
// and GiB (and k/K, M, G as the same binary multiples).
type byteSize int

func (b *byteSize) String() string {
	if b == nil {
		return "0"
	}
	v := int(*b)
	for _, u := range []struct {
		s string
		n int
	}{{"GiB", 1 << 30}, {"MiB", 1 << 20}, {"KiB", 1 << 10}} {
		if v != 0 && v%u.n == 0 {
			return strconv.Itoa(v/u.n) + u.s
		}
	}
	return strconv.Itoa(v)
}

func (b *byteSize) Set(s string) error {
	t := strings.TrimSpace(s)
	mult := 1
	for _, u := range []struct {
		s string
		n int
	}{{"GiB", 1 << 30}, {"MiB", 1 << 20}, {"KiB", 1 << 10}, {"G", 1 << 30}, {"M", 1 << 20}, {"K", 1 << 10}, {"k", 1 << 10}, {"B", 1}} {
		if strings.HasSuffix(t, u.s) {
			t, mult = strings.TrimSpace(strings.TrimSuffix(t, u.s)), u.n
			break
		}
	}
	n, err := strconv.Atoi(t)
	if err != nil {
		return fmt.Errorf("%q is not a size (e.g. 64MiB)", s)
	}
	if n <= 0 || n > (1<<31-1)/mult {
		return fmt.Errorf("%q is out of range (1 B to 2 GiB)", s)
	}
	*b = byteSize(n * mult)
	return nil
}

// logLevel is a slog.Level flag.
type logLevel slog.Level

func (l *logLevel) String() string {
	if l == nil {
		return "info"
	}
	return strings.ToLower(slog.Level(*l).String())
}

func (l *logLevel) Set(s string) error {
	var v slog.Level
	if err := v.UnmarshalText([]byte(s)); err != nil {
		return errors.New("not one of debug, info, warn, error")
	}
	*l = logLevel(v)
	return nil
}
