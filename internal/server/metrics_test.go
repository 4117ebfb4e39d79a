package server_test

import (
	"context"
	"net/http"
	"strings"
	"testing"

	"github.com/prometheus/client_golang/prometheus/testutil"
	dto "github.com/prometheus/client_model/go"
	"github.com/prometheus/common/expfmt"
	"github.com/prometheus/common/model"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
)

// exercise sends a bit of every kind of traffic.
func exercise(t *testing.T, ts *testServer) {
	t.Helper()
	c := ts.client()
	if _, err := c.AnalyzeCapture(context.Background(), &kinchainv1.AnalyzeCaptureRequest{Capture: goodCapture("m", 25)}); err != nil {
		t.Fatal(err)
	}
	bad := goodCapture("m", 25)
	bad.Tracks[0].TimeS[3] = bad.Tracks[0].TimeS[2]
	_, _ = c.AnalyzeCapture(context.Background(), &kinchainv1.AnalyzeCaptureRequest{Capture: bad})
	st, err := c.StreamCapture(context.Background())
	if err != nil {
		t.Fatal(err)
	}
	_ = st.Send(header(100))
	_ = st.Send(batch(0, 5))
	_ = st.CloseSend()
	if _, err := recvAll(st); err != nil {
		t.Fatal(err)
	}
	if code, _, _ := httpDo(t, "POST", ts.httpURL("/v1/captures:analyze"), "text/csv", strings.NewReader(goodCSV("h", 20))); code != 200 {
		t.Fatalf("csv: %d", code)
	}
}

// TestMetricsLint runs client_golang's linter (promlint) over everything
// the server registers, after traffic, and fails on any problem.
func TestMetricsLint(t *testing.T) {
	ts := startServer(t, testConfig(), &fakeAnalyzer{}, fakeStreams, false)
	exercise(t, ts)
	problems, err := testutil.GatherAndLint(ts.reg)
	if err != nil {
		t.Fatal(err)
	}
	for _, p := range problems {
		t.Errorf("promlint: %s: %s", p.Metric, p.Text)
	}
}

// TestMetricsScrape scrapes /metrics like Prometheus, parses it with the
// text-format parser of prometheus/common and checks the expected series.
func TestMetricsScrape(t *testing.T) {
	ts := startServer(t, testConfig(), &fakeAnalyzer{}, fakeStreams, false)
	exercise(t, ts)
	resp, err := http.Get("http://" + ts.srv.Addrs().Metrics + "/metrics")
	if err != nil {
		t.Fatal(err)
	}
	defer resp.Body.Close()
	if resp.StatusCode != 200 {
		t.Fatalf("/metrics: %d", resp.StatusCode)
	}
	p := expfmt.NewTextParser(model.UTF8Validation)
	fams, err := p.TextToMetricFamilies(resp.Body)
	if err != nil {
		t.Fatalf("parse /metrics: %v", err)
	}
	value := func(name string, labels map[string]string) (float64, bool) {
		f, ok := fams[name]
		if !ok {
			return 0, false
		}
	next:
		for _, m := range f.GetMetric() {
			have := map[string]string{}
			for _, l := range m.GetLabel() {
				have[l.GetName()] = l.GetValue()
			}
			for k, v := range labels {
				if have[k] != v {
					continue next
				}
			}
			switch f.GetType() {
			case dto.MetricType_COUNTER:
				return m.GetCounter().GetValue(), true
			case dto.MetricType_GAUGE:
				return m.GetGauge().GetValue(), true
			case dto.MetricType_HISTOGRAM:
				return float64(m.GetHistogram().GetSampleCount()), true
			}
		}
		return 0, false
	}
	const analyze = "/kinchain.v1.KinematicsService/AnalyzeCapture"
	checks := []struct {
		name   string
		labels map[string]string
		want   float64 // exact; -1: present and > 0
	}{
		{"kinchain_grpc_requests_total", map[string]string{"method": analyze, "code": "OK"}, 1},
		{"kinchain_grpc_requests_total", map[string]string{"method": analyze, "code": "InvalidArgument"}, 1},
		{"kinchain_grpc_requests_total", map[string]string{"method": "/kinchain.v1.KinematicsService/StreamCapture", "code": "OK"}, 1},
		{"kinchain_grpc_request_duration_seconds", map[string]string{"method": analyze}, 2},
		{"kinchain_grpc_received_message_size_bytes", map[string]string{"method": analyze}, 2},
		{"kinchain_http_requests_total", map[string]string{"route": "/v1/captures:analyze", "code": "200"}, 1},
		{"kinchain_http_request_duration_seconds", map[string]string{"route": "/v1/captures:analyze"}, 1},
		{"kinchain_http_request_size_bytes", map[string]string{"route": "/v1/captures:analyze"}, 1},
		// 2×25 (gRPC) + 5 (stream summary) + 2×20 (CSV).
		{"kinchain_samples_analyzed_total", nil, 95},
		// One per fake response and one in the stream summary.
		{"kinchain_swings_found_total", nil, 3},
		{"kinchain_validation_failures_total", map[string]string{"reason": "duplicate_time"}, 1},
		{"kinchain_validation_failures_total", map[string]string{"reason": "not_unit"}, 0},
		{"kinchain_live_streams", nil, 0},
		{"kinchain_streams_ended_total", map[string]string{"reason": "client_closed"}, 1},
		{"kinchain_requests_in_flight", map[string]string{"transport": "grpc"}, 0},
		{"kinchain_requests_rejected_total", map[string]string{"limit": "requests"}, 0},
		{"kinchain_panics_recovered_total", nil, 0},
		{"kinchain_build_info", nil, 1},
		{"go_goroutines", nil, -1},
		{"process_cpu_seconds_total", nil, -1},
	}
	for _, c := range checks {
		got, ok := value(c.name, c.labels)
		switch {
		case !ok:
			t.Errorf("%s%v: missing from /metrics", c.name, c.labels)
		case c.want >= 0 && got != c.want:
			t.Errorf("%s%v = %v, want %v", c.name, c.labels, got, c.want)
		case c.want < 0 && !(got > 0):
			t.Errorf("%s%v = %v, want > 0", c.name, c.labels, got)
		}
	}
	if f := fams["kinchain_build_info"]; f != nil {
		names := map[string]bool{}
		for _, l := range f.GetMetric()[0].GetLabel() {
			names[l.GetName()] = l.GetValue() != ""
		}
		if !names["version"] || !names["commit"] || !names["goversion"] {
			t.Errorf("kinchain_build_info labels = %v", f.GetMetric()[0].GetLabel())
		}
	}
}
