package server

import (
	"context"
	"errors"
	"runtime"
	"strconv"
	"time"

	"github.com/grpc-ecosystem/go-grpc-middleware/v2/interceptors"
	"github.com/prometheus/client_golang/prometheus"
	"github.com/prometheus/client_golang/prometheus/collectors"
	"google.golang.org/grpc/status"
	"google.golang.org/protobuf/proto"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/validate"
	"github.com/kinchain/kinchain/internal/version"
)

// Every metric the server exports is defined in this file. Names follow
// namespace_subsystem_name_unit with the kinchain namespace; labels have
// small fixed value sets (gRPC method, code, HTTP route, reason), never ids.

const namespace = "kinchain"

// Transport label values of kinchain_requests_in_flight.
const (
	transportGRPC = "grpc"
	transportHTTP = "http"
)

// Limit label values of kinchain_requests_rejected_total.
const (
	limitRequests = "requests"
	limitStreams  = "streams"
	limitBody     = "body_size"
)

// Reason label values of kinchain_streams_ended_total.
const (
	streamEndClient   = "client_closed"
	streamEndIdle     = "idle_timeout"
	streamEndDuration = "max_duration"
	streamEndShutdown = "shutdown"
	streamEndCanceled = "canceled"
	streamEndError    = "error"
)

// durationBuckets cover a health check (sub-millisecond) to a long capture
// analysed under load (tens of seconds), in seconds.
var durationBuckets = []float64{0.0005, 0.001, 0.0025, 0.005, 0.01, 0.025, 0.05, 0.1, 0.25, 0.5, 1, 2.5, 5, 10, 30}

// sizeBuckets cover 256 B to 256 MiB by powers of four, in bytes.
var sizeBuckets = prometheus.ExponentialBuckets(256, 4, 11)

// metrics holds the server's collectors.
type metrics struct {
	grpcRequests  *prometheus.CounterVec   // method, code
	grpcDuration  *prometheus.HistogramVec // method
	grpcMsgBytes  *prometheus.HistogramVec // method
	httpRequests  *prometheus.CounterVec   // route, code
	httpDuration  *prometheus.HistogramVec // route
	httpBodyBytes *prometheus.HistogramVec // route
	inFlight      *prometheus.GaugeVec     // transport
	rejected      *prometheus.CounterVec   // limit
	liveStreams   prometheus.Gauge
	streamsEnded  *prometheus.CounterVec // reason
	samples       prometheus.Counter
	swings        prometheus.Counter
	validation    *prometheus.CounterVec // reason
	panics        prometheus.Counter
	authFailures  *prometheus.CounterVec // transport, reason
	rateLimited   *prometheus.CounterVec // token (name from the token file)
	tlsReloads    *prometheus.CounterVec // result (ok, error)
	tlsExpiry     *prometheus.GaugeVec   // cert_file
	buildInfo     *prometheus.GaugeVec   // version, commit, goversion
}

// newMetrics creates the collectors and registers them, with the Go runtime
// and process collectors, on reg. Go and process collectors that reg
// already holds are kept.
func newMetrics(reg prometheus.Registerer) (*metrics, error) {
	m := &metrics{
		grpcRequests: prometheus.NewCounterVec(prometheus.CounterOpts{
			Namespace: namespace, Subsystem: "grpc", Name: "requests_total",
			Help: "gRPC calls completed, by full method and status code.",
		}, []string{"method", "code"}),
		grpcDuration: prometheus.NewHistogramVec(prometheus.HistogramOpts{
			Namespace: namespace, Subsystem: "grpc", Name: "request_duration_seconds",
			Help:    "Time from the start of a gRPC call to its end, by full method.",
			Buckets: durationBuckets,
		}, []string{"method"}),
		grpcMsgBytes: prometheus.NewHistogramVec(prometheus.HistogramOpts{
			Namespace: namespace, Subsystem: "grpc", Name: "received_message_size_bytes",
			Help:    "Size of each received gRPC request message (protobuf encoding), by full method.",
			Buckets: sizeBuckets,
		}, []string{"method"}),
		httpRequests: prometheus.NewCounterVec(prometheus.CounterOpts{
			Namespace: namespace, Subsystem: "http", Name: "requests_total",
			Help: "HTTP requests completed, by route pattern and status code.",
		}, []string{"route", "code"}),
		httpDuration: prometheus.NewHistogramVec(prometheus.HistogramOpts{
			Namespace: namespace, Subsystem: "http", Name: "request_duration_seconds",
			Help:    "Time to answer an HTTP request, by route pattern.",
			Buckets: durationBuckets,
		}, []string{"route"}),
		httpBodyBytes: prometheus.NewHistogramVec(prometheus.HistogramOpts{
			Namespace: namespace, Subsystem: "http", Name: "request_size_bytes",
			Help:    "Bytes of HTTP request body read, by route pattern.",
			Buckets: sizeBuckets,
		}, []string{"route"}),
		inFlight: prometheus.NewGaugeVec(prometheus.GaugeOpts{
			Namespace: namespace, Name: "requests_in_flight",
			Help: "Requests being handled now, by transport (grpc, http); streams included.",
		}, []string{"transport"}),
		rejected: prometheus.NewCounterVec(prometheus.CounterOpts{
			Namespace: namespace, Name: "requests_rejected_total",
			Help: "Requests refused by a server limit: requests (concurrent analyses), streams (concurrent streams), body_size (HTTP body too large).",
		}, []string{"limit"}),
		liveStreams: prometheus.NewGauge(prometheus.GaugeOpts{
			Namespace: namespace, Name: "live_streams",
			Help: "StreamCapture calls open now.",
		}),
		streamsEnded: prometheus.NewCounterVec(prometheus.CounterOpts{
			Namespace: namespace, Name: "streams_ended_total",
			Help: "StreamCapture calls ended, by reason: client_closed, idle_timeout, max_duration, shutdown, canceled, error.",
		}, []string{"reason"}),
		samples: prometheus.NewCounter(prometheus.CounterOpts{
			Namespace: namespace, Name: "samples_analyzed_total",
			Help: "Track samples in successfully analysed captures and streams.",
		}),
		swings: prometheus.NewCounter(prometheus.CounterOpts{
			Namespace: namespace, Name: "swings_found_total",
			Help: "Swings found in successfully analysed captures and streams.",
		}),
		validation: prometheus.NewCounterVec(prometheus.CounterOpts{
			Namespace: namespace, Name: "validation_failures_total",
			Help: "Requests rejected as bad input, by validation reason.",
		}, []string{"reason"}),
		panics: prometheus.NewCounter(prometheus.CounterOpts{
			Namespace: namespace, Name: "panics_recovered_total",
			Help: "Panics in handlers turned into INTERNAL errors (HTTP 500).",
		}),
		authFailures: prometheus.NewCounterVec(prometheus.CounterOpts{
			Namespace: namespace, Name: "auth_failures_total",
			Help: "Requests and handshakes refused by authentication, by transport (grpc, http) and reason: missing_token, malformed_token, unknown_token, no_client_cert, invalid_client_cert.",
		}, []string{"transport", "reason"}),
		rateLimited: prometheus.NewCounterVec(prometheus.CounterOpts{
			Namespace: namespace, Name: "rate_limited_total",
			Help: "Requests refused because their bearer token was over its rate limit, by token name (from the token file).",
		}, []string{"token"}),
		tlsReloads: prometheus.NewCounterVec(prometheus.CounterOpts{
			Namespace: namespace, Name: "tls_certificate_reloads_total",
			Help: "Times the server certificate's files changed while serving, by result: ok (the new pair is served) or error (it did not load; the previous one stays).",
		}, []string{"result"}),
		tlsExpiry: prometheus.NewGaugeVec(prometheus.GaugeOpts{
			Namespace: namespace, Name: "tls_certificate_expiry_timestamp_seconds",
			Help: "NotAfter of the served TLS certificate, Unix time, by certificate file name; absent without TLS.",
		}, []string{"cert_file"}),
		buildInfo: prometheus.NewGaugeVec(prometheus.GaugeOpts{
			Namespace: namespace, Name: "build_info",
			Help: "Always 1; the labels identify the build.",
		}, []string{"version", "commit", "goversion"}),
	}
	m.buildInfo.WithLabelValues(version.Version, version.Commit, runtime.Version()).Set(1)
	for _, t := range []string{transportGRPC, transportHTTP} {
		m.inFlight.WithLabelValues(t)
	}
	for _, l := range []string{limitRequests, limitStreams, limitBody} {
		m.rejected.WithLabelValues(l)
	}
	for _, t := range []string{transportGRPC, transportHTTP} {
		for _, r := range authReasons {
			m.authFailures.WithLabelValues(t, r)
		}
	}
	for _, r := range validate.AllReasons() {
		m.validation.WithLabelValues(string(r))
	}
	for _, r := range []string{streamEndClient, streamEndIdle, streamEndDuration, streamEndShutdown, streamEndCanceled, streamEndError} {
		m.streamsEnded.WithLabelValues(r)
	}
	cs := []prometheus.Collector{
		m.grpcRequests, m.grpcDuration, m.grpcMsgBytes,
		m.httpRequests, m.httpDuration, m.httpBodyBytes,
		m.inFlight, m.rejected, m.liveStreams, m.streamsEnded,
		m.samples, m.swings, m.validation, m.panics,
		m.authFailures, m.rateLimited, m.tlsReloads, m.tlsExpiry, m.buildInfo,
	}
	for _, c := range cs {
		if err := reg.Register(c); err != nil {
			return nil, err
		}
	}
	for _, c := range []prometheus.Collector{
		collectors.NewGoCollector(),
		collectors.NewProcessCollector(collectors.ProcessCollectorOpts{}),
	} {
		var are prometheus.AlreadyRegisteredError
		if err := reg.Register(c); err != nil && !errors.As(err, &are) {
			return nil, err
		}
	}
	return m, nil
}

// observeResponse counts the samples and swings of a successful analysis.
func (m *metrics) observeResponse(resp *kinchainv1.AnalyzeCaptureResponse) {
	var n int64
	for _, t := range resp.GetQuality().GetTracks() {
		n += int64(t.GetSamples())
	}
	m.samples.Add(float64(n))
	m.swings.Add(float64(len(resp.GetSwings())))
}

// grpcReportable adapts the metrics to go-grpc-middleware's reporting
// interceptors: one reporter per call.
func (m *metrics) grpcReportable() interceptors.ServerReportable {
	return interceptors.CommonReportableFunc(func(ctx context.Context, c interceptors.CallMeta) (interceptors.Reporter, context.Context) {
		m.inFlight.WithLabelValues(transportGRPC).Inc()
		return &grpcReporter{m: m, method: c.FullMethod()}, ctx
	})
}

// grpcReporter records one gRPC call.
type grpcReporter struct {
	m      *metrics
	method string
}

// PostCall counts the call by code and records its duration.
func (r *grpcReporter) PostCall(err error, d time.Duration) {
	r.m.inFlight.WithLabelValues(transportGRPC).Dec()
	r.m.grpcRequests.WithLabelValues(r.method, status.Code(err).String()).Inc()
	r.m.grpcDuration.WithLabelValues(r.method).Observe(d.Seconds())
}

// PostMsgSend records nothing.
func (r *grpcReporter) PostMsgSend(any, error, time.Duration) {}

// PostMsgReceive records the size of a received request message.
func (r *grpcReporter) PostMsgReceive(msg any, err error, _ time.Duration) {
	if err != nil {
		return
	}
	switch v := msg.(type) {
	case *rawMessage:
		r.m.grpcMsgBytes.WithLabelValues(r.method).Observe(float64(len(v.b)))
	case proto.Message:
		r.m.grpcMsgBytes.WithLabelValues(r.method).Observe(float64(proto.Size(v)))
	}
}

// httpCode is the code label of an HTTP status.
func httpCode(st int) string { return strconv.Itoa(st) }
