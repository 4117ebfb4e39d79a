// Command loadgen drives a kinchain server over loopback and reports
// throughput, latency percentiles, errors by code and the server's peak
// resident memory. Run it from the repository root:
//
//	go run ./internal/server/loadgen                    # 10 s per phase
//	go run ./internal/server/loadgen -duration 3s       # the short CI mode
//	go run ./internal/server/loadgen -transport http    # the JSON gateway
//
// By default it starts the server itself as a child process running
// `kinchain serve` (this program re-executes itself and calls the same
// cli.RunServe as the kinchain binary; -server-bin runs a built kinchain
// binary instead) on 127.0.0.1 ports chosen by the OS, so that the peak
// RSS it reports — VmHWM from /proc/<pid>/status — is the server's alone.
// With -addr it drives a server that is already running on loopback and
// reports no memory figure.
//
// Three phases of -duration each, every one bounded in time and in calls
// (-max-calls), and the program stops by itself:
//
//  1. capacity: closed loop, -clients callers back to back; the rate of
//     successful analyses is the measured capacity;
//  2. fixed rate: open loop at -rate calls/s (default half the capacity);
//  3. overload: open loop at twice the capacity.
//
// Before the phases, an in-process reference: the same callers run
// engine.Analyze on the same request in this process for -duration. The
// capacity phase then reports the CPU time per successful call of the
// server's process (from /proc, internal/procstat) and of this one, and
// the ratio of in-process CPU per analysis to the server's CPU per call:
// the share of the server's work that is analysis.
//
// Open-loop latency is measured from the moment a call was due, so a
// server that falls behind is charged for the wait. The request is the
// synthetic model golfer's swing of the server benchmark: 3 s, six
// segments, 1000 Hz (18,000 samples; 720 KB of protobuf, ~1.6 MB of JSON).
// The exit status is 1 when a phase has no successful call or any call
// ends with a code other than OK and RESOURCE_EXHAUSTED (HTTP 200 and 429).
package main

import (
	"bufio"
	"bytes"
	"context"
	"encoding/json"
	"errors"
	"flag"
	"fmt"
	"io"
	"net"
	"net/http"
	"os"
	"os/exec"
	"slices"
	"strconv"
	"strings"
	"sync"
	"syscall"
	"time"

	"google.golang.org/grpc"
	"google.golang.org/grpc/credentials/insecure"
	"google.golang.org/grpc/encoding"
	"google.golang.org/grpc/mem"
	"google.golang.org/grpc/status"
	"google.golang.org/protobuf/encoding/protojson"
	"google.golang.org/protobuf/proto"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/cli"
	"github.com/kinchain/kinchain/internal/engine"
	"github.com/kinchain/kinchain/internal/procstat"
	"github.com/kinchain/kinchain/internal/synth"
)

// childArg makes this program run `kinchain serve` with the arguments
// after it.
const childArg = "__serve"

func main() {
	if len(os.Args) > 1 && os.Args[1] == childArg {
		os.Exit(cli.Main(append([]string{"serve"}, os.Args[2:]...), os.Stdin, os.Stdout, os.Stderr))
	}
	if err := run(os.Args[1:], os.Stdout); err != nil {
		fmt.Fprintln(os.Stderr, "loadgen:", err)
		os.Exit(1)
	}
}

type options struct {
	duration    time.Duration
	transport   string
	addr        string
	serverBin   string
	maxRequests int
	clients     int
	rate        float64
	maxCalls    int
	json        bool
	streams     int
	batchMs     float64
}

func run(args []string, out io.Writer) error {
	var o options
	fs := flag.NewFlagSet("loadgen", flag.ContinueOnError)
	fs.DurationVar(&o.duration, "duration", 10*time.Second, "length of each of the three phases")
	fs.StringVar(&o.transport, "transport", "grpc", "grpc (AnalyzeCapture), http (POST /v1/captures:analyze, JSON) or stream (live StreamCapture calls)")
	fs.IntVar(&o.streams, "streams", 500, "with -transport stream: live streams at once")
	fs.Float64Var(&o.batchMs, "batch-ms", 10, "with -transport stream: stream time per batch, ms")
	fs.StringVar(&o.addr, "addr", "", "drive this running server (127.0.0.1:PORT, the gRPC or HTTP port) instead of starting one")
	fs.StringVar(&o.serverBin, "server-bin", "", "kinchain binary to start as the server (default: this program runs kinchain serve itself)")
	fs.IntVar(&o.maxRequests, "max-requests", 4, "the server's -max-requests (analyses at once)")
	fs.IntVar(&o.clients, "clients", 0, "callers of the capacity phase (default: -max-requests)")
	fs.Float64Var(&o.rate, "rate", 0, "calls/s of the fixed-rate phase (default: half the measured capacity)")
	fs.IntVar(&o.maxCalls, "max-calls", 20000, "most calls per phase")
	fs.BoolVar(&o.json, "json", false, "print the report as JSON")
	if err := fs.Parse(args); err != nil {
		return err
	}
	if o.transport != "grpc" && o.transport != "http" && o.transport != "stream" {
		return fmt.Errorf("-transport %q: want grpc, http or stream", o.transport)
	}
	if o.transport == "stream" && (o.streams < 1 || o.streams > 10000) {
		return fmt.Errorf("-streams %d: want 1 to 10000", o.streams)
	}
	if o.transport == "stream" && !(o.batchMs >= 1 && o.batchMs <= 1000) {
		return fmt.Errorf("-batch-ms %v: want 1 to 1000", o.batchMs)
	}
	if o.duration <= 0 || o.duration > 10*time.Minute {
		return fmt.Errorf("-duration %v: want 0 < d ≤ 10m", o.duration)
	}
	if o.clients <= 0 {
		o.clients = o.maxRequests
	}
	if o.transport == "stream" {
		return runStreams(o, out)
	}

	c, _, err := synth.Generate(synth.Config{Rate: 1000, Duration: 3, LeadIn: 0.5, Tail: 0.3, Segments: []kinchainv1.Segment{
		kinchainv1.Segment_SEGMENT_PELVIS, kinchainv1.Segment_SEGMENT_THORAX,
		kinchainv1.Segment_SEGMENT_LEAD_UPPER_ARM, kinchainv1.Segment_SEGMENT_LEAD_FOREARM,
		kinchainv1.Segment_SEGMENT_LEAD_HAND, kinchainv1.Segment_SEGMENT_CLUB,
	}})
	if err != nil {
		return err
	}
	req := &kinchainv1.AnalyzeCaptureRequest{Capture: c}

	srv, addr, err := serverFor(o)
	if err != nil {
		return err
	}
	if srv != nil {
		defer srv.stop()
	}
	call, closeFn, err := newCaller(o.transport, addr, req)
	if err != nil {
		return err
	}
	defer closeFn()

	rep := report{Transport: o.transport, Server: "external " + addr, PhaseSeconds: o.duration.Seconds(), MaxRequests: o.maxRequests}
	if srv != nil {
		rep.Server = fmt.Sprintf("child process %d (%s), -max-requests %d", srv.cmd.Process.Pid, srv.how, o.maxRequests)
	}
	// Warm up: a few calls so that connections are up.
	for i := 0; i < 3; i++ {
		_, _ = call(context.Background())
	}

	// The in-process reference: the same engine, the same callers, in this
	// process, while the server idles.
	rep.InProcess = inProcess(o, req)
	capPhase := closedLoop(o, call, srv)
	rep.Phases = append(rep.Phases, capPhase)
	if capPhase.OK > 0 && rep.InProcess.CPUms > 0 {
		rep.WallRatio = capPhase.OKPerSecond / rep.InProcess.PerSecond
		if capPhase.ServerCPUms > 0 {
			rep.CPURatio = rep.InProcess.CPUms / capPhase.ServerCPUms
		}
	}
	capacity := capPhase.OKPerSecond
	if capacity <= 0 {
		printReport(out, rep, o.json)
		return errors.New("capacity phase: no successful call")
	}
	rate := o.rate
	if rate <= 0 {
		rate = capacity / 2
	}
	rep.Phases = append(rep.Phases, openLoop(o, "fixed rate", rate, call, srv))
	rep.Phases = append(rep.Phases, openLoop(o, "2× capacity", 2*capacity, call, srv))
	if srv != nil {
		rep.PeakRSSMiB = srv.hwm()
	}
	printReport(out, rep, o.json)
	for _, p := range rep.Phases {
		if p.OK == 0 {
			return fmt.Errorf("%s: no successful call", p.Name)
		}
		for code := range p.Codes {
			if code != "OK" && code != "ResourceExhausted" {
				return fmt.Errorf("%s: calls ended %s", p.Name, code)
			}
		}
	}
	return nil
}

// serverFor starts the child server, unless -addr names one, and returns
// the address to drive (the HTTP port for -transport http, else gRPC's),
// checked to be on loopback; the caller stops the child.
func serverFor(o options) (*child, string, error) {
	addr := o.addr
	var srv *child
	if addr == "" {
		var err error
		if srv, err = startServer(o); err != nil {
			return nil, "", err
		}
		addr = srv.grpcAddr
		if o.transport == "http" {
			addr = srv.httpAddr
		}
	}
	if err := loopbackOnly(addr); err != nil {
		if srv != nil {
			srv.stop()
		}
		return nil, "", err
	}
	return srv, addr, nil
}

// loopbackOnly refuses any address that is not on the loopback interface.
func loopbackOnly(addr string) error {
	host, _, err := net.SplitHostPort(addr)
	if err != nil {
		return err
	}
	if ip := net.ParseIP(host); host != "localhost" && (ip == nil || !ip.IsLoopback()) {
		return fmt.Errorf("%s is not a loopback address; loadgen drives loopback servers only", addr)
	}
	return nil
}

// child is the server process.
type child struct {
	cmd                *exec.Cmd
	how                string
	grpcAddr, httpAddr string
	done               chan error
}

func startServer(o options) (*child, error) {
	args := []string{"-grpc-addr", "127.0.0.1:0", "-http-addr", "127.0.0.1:0", "-metrics-addr", "",
		"-max-requests", strconv.Itoa(o.maxRequests), "-log-level", "info", "-shutdown-grace", "5s"}
	if o.transport == "stream" {
		args = append(args, "-max-streams", strconv.Itoa(o.streams))
	}
	var cmd *exec.Cmd
	how := "kinchain serve run by loadgen"
	if o.serverBin != "" {
		cmd = exec.Command(o.serverBin, append([]string{"serve"}, args...)...)
		how = o.serverBin + " serve"
	} else {
		self, err := os.Executable()
		if err != nil {
			return nil, err
		}
		cmd = exec.Command(self, append([]string{childArg}, args...)...)
	}
	// The log (one line per call at info, as in production) is read and
	// dropped; the start-up line gives the bound addresses.
	stderr, err := cmd.StderrPipe()
	if err != nil {
		return nil, err
	}
	if err := cmd.Start(); err != nil {
		return nil, err
	}
	c := &child{cmd: cmd, how: how, done: make(chan error, 1)}
	lines := make(chan string, 16)
	go func() {
		sc := bufio.NewScanner(stderr)
		sc.Buffer(make([]byte, 0, 1<<16), 1<<20)
		for sc.Scan() {
			select {
			case lines <- sc.Text():
			default:
			}
		}
		close(lines)
		c.done <- cmd.Wait()
	}()
	deadline := time.After(30 * time.Second)
	for {
		select {
		case l, ok := <-lines:
			if !ok {
				return nil, errors.New("the server exited before it started")
			}
			var start struct {
				Msg   string            `json:"msg"`
				Bound map[string]string `json:"bound"`
			}
			if json.Unmarshal([]byte(l), &start) == nil && start.Msg == "kinchain serve starting" {
				c.grpcAddr, c.httpAddr = start.Bound["grpc"], start.Bound["http"]
				go func() { // keep draining the log
					for range lines {
					}
				}()
				return c, waitReady(c.httpAddr)
			}
		case <-deadline:
			c.stop()
			return nil, errors.New("the server did not start within 30 s")
		}
	}
}

func waitReady(httpAddr string) error {
	for i := 0; i < 300; i++ {
		if resp, err := http.Get("http://" + httpAddr + "/readyz"); err == nil {
			resp.Body.Close()
			if resp.StatusCode == http.StatusOK {
				return nil
			}
		}
		time.Sleep(10 * time.Millisecond)
	}
	return errors.New("the server never became ready")
}

// hwm is the server's peak resident set (VmHWM), MiB; 0 when it cannot be
// read.
func (c *child) hwm() float64 {
	b, err := procstat.PeakRSS(c.cmd.Process.Pid)
	if err != nil {
		return 0
	}
	return float64(b) / (1 << 20)
}

func (c *child) stop() {
	_ = c.cmd.Process.Signal(syscall.SIGTERM)
	select {
	case <-c.done:
	case <-time.After(15 * time.Second):
		_ = c.cmd.Process.Kill()
		<-c.done
	}
}

// rawCodec sends the pre-encoded request as it is.
type rawCodec struct{ encoding.CodecV2 }

func (r rawCodec) Marshal(v any) (mem.BufferSlice, error) {
	if b, ok := v.(*[]byte); ok {
		return mem.BufferSlice{mem.SliceBuffer(*b)}, nil
	}
	return r.CodecV2.Marshal(v)
}

// newCaller returns a function making one call and reporting its code
// ("OK", "ResourceExhausted", … for gRPC; the gRPC name of the HTTP
// status's code for HTTP).
func newCaller(transport, addr string, req *kinchainv1.AnalyzeCaptureRequest) (func(context.Context) (string, error), func(), error) {
	if transport == "grpc" {
		wire, err := proto.Marshal(req)
		if err != nil {
			return nil, nil, err
		}
		var conns []*grpc.ClientConn
		for i := 0; i < 4; i++ {
			cc, err := grpc.NewClient(addr, grpc.WithTransportCredentials(insecure.NewCredentials()),
				grpc.WithDefaultCallOptions(grpc.MaxCallRecvMsgSize(64<<20)))
			if err != nil {
				return nil, nil, err
			}
			conns = append(conns, cc)
		}
		var mu sync.Mutex
		n := 0
		codec := grpc.ForceCodecV2(rawCodec{encoding.GetCodecV2("proto")})
		call := func(ctx context.Context) (string, error) {
			mu.Lock()
			cc := conns[n%len(conns)]
			n++
			mu.Unlock()
			err := cc.Invoke(ctx, kinchainv1.KinematicsService_AnalyzeCapture_FullMethodName, &wire, &kinchainv1.AnalyzeCaptureResponse{}, codec)
			return status.Code(err).String(), err
		}
		return call, func() {
			for _, cc := range conns {
				cc.Close()
			}
		}, nil
	}
	body, err := protojson.Marshal(req)
	if err != nil {
		return nil, nil, err
	}
	hc := &http.Client{Transport: &http.Transport{MaxIdleConnsPerHost: 256}}
	url := "http://" + addr + "/v1/captures:analyze"
	call := func(ctx context.Context) (string, error) {
		r, _ := http.NewRequestWithContext(ctx, http.MethodPost, url, bytes.NewReader(body))
		r.Header.Set("Content-Type", "application/json")
		resp, err := hc.Do(r)
		if err != nil {
			return "transport error", err
		}
		_, _ = io.Copy(io.Discard, resp.Body)
		resp.Body.Close()
		switch resp.StatusCode {
		case http.StatusOK:
			return "OK", nil
		case http.StatusTooManyRequests:
			return "ResourceExhausted", nil
		}
		return "HTTP " + strconv.Itoa(resp.StatusCode), nil
	}
	return call, hc.CloseIdleConnections, nil
}

// phase is one phase's figures.
type phase struct {
	Name        string         `json:"name"`
	OfferedRate float64        `json:"offered_per_s,omitempty"`
	Calls       int            `json:"calls"`
	OK          int            `json:"ok"`
	OKPerSecond float64        `json:"ok_per_s"`
	P50OKms     float64        `json:"p50_ok_ms"`
	P99OKms     float64        `json:"p99_ok_ms"`
	P50Allms    float64        `json:"p50_all_ms"`
	P99Allms    float64        `json:"p99_all_ms"`
	P99Refusals float64        `json:"p99_refused_ms"`
	Codes       map[string]int `json:"codes"`
	PeakRSSMiB  float64        `json:"server_peak_rss_mib,omitempty"`
	Seconds     float64        `json:"seconds"`
	// ServerCPUms and ClientCPUms are the CPU time (user + system) per
	// successful call of the server's process and of this one; only in
	// the capacity phase, ServerCPUms only with a child server.
	ServerCPUms float64 `json:"server_cpu_ms_per_ok,omitempty"`
	ClientCPUms float64 `json:"client_cpu_ms_per_ok,omitempty"`
}

// reference is the in-process figure: engine.Analyze called directly.
type reference struct {
	Calls     int     `json:"calls"`
	PerSecond float64 `json:"analyses_per_s"`
	CPUms     float64 `json:"cpu_ms_per_analysis"`
}

type report struct {
	Transport    string    `json:"transport"`
	Server       string    `json:"server"`
	PhaseSeconds float64   `json:"phase_seconds"`
	MaxRequests  int       `json:"max_requests"`
	PeakRSSMiB   float64   `json:"server_peak_rss_mib,omitempty"`
	InProcess    reference `json:"in_process"`
	// WallRatio is the capacity phase's ok/s over the in-process
	// analyses/s (client and server sharing the machine); CPURatio the
	// in-process CPU per analysis over the server's CPU per successful
	// call: the share of the server's CPU that is analysis, which is what
	// bounds its throughput on a machine of its own.
	WallRatio float64 `json:"wall_ratio,omitempty"`
	CPURatio  float64 `json:"cpu_ratio,omitempty"`
	Phases    []phase `json:"phases"`
}

// recorder collects outcomes.
type recorder struct {
	mu      sync.Mutex
	ok, all []time.Duration
	refused []time.Duration
	codes   map[string]int
}

func (r *recorder) add(code string, d time.Duration) {
	r.mu.Lock()
	defer r.mu.Unlock()
	if r.codes == nil {
		r.codes = map[string]int{}
	}
	r.codes[code]++
	r.all = append(r.all, d)
	switch code {
	case "OK":
		r.ok = append(r.ok, d)
	case "ResourceExhausted":
		r.refused = append(r.refused, d)
	}
}

func pct(ds []time.Duration, q float64) float64 {
	if len(ds) == 0 {
		return 0
	}
	s := slices.Clone(ds)
	slices.Sort(s)
	i := int(q*float64(len(s))+0.5) - 1
	return float64(s[max(0, min(len(s)-1, i))].Microseconds()) / 1000
}

func (r *recorder) phase(name string, offered float64, elapsed time.Duration, srv *child) phase {
	p := phase{Name: name, OfferedRate: offered, Calls: len(r.all), OK: len(r.ok), Codes: r.codes,
		OKPerSecond: float64(len(r.ok)) / elapsed.Seconds(), Seconds: elapsed.Seconds(),
		P50OKms: pct(r.ok, 0.5), P99OKms: pct(r.ok, 0.99), P50Allms: pct(r.all, 0.5), P99Allms: pct(r.all, 0.99),
		P99Refusals: pct(r.refused, 0.99)}
	if srv != nil {
		p.PeakRSSMiB = srv.hwm()
	}
	return p
}

// closedLoop runs o.clients callers back to back for o.duration.
func closedLoop(o options, call func(context.Context) (string, error), srv *child) phase {
	var rec recorder
	self0 := procstat.Self()
	server0, serverOK := srv.cpu()
	_, elapsed := backToBack(o, func() {
		t0 := time.Now()
		ctx, cancel := context.WithTimeout(context.Background(), 30*time.Second)
		code, _ := call(ctx)
		cancel()
		rec.add(code, time.Since(t0))
	})
	p := rec.phase("capacity (closed loop)", 0, elapsed, srv)
	if p.OK > 0 {
		p.ClientCPUms = perCall(procstat.Self()-self0, p.OK)
		if server1, ok := srv.cpu(); ok && serverOK && server1 > server0 {
			p.ServerCPUms = perCall(server1-server0, p.OK)
		}
	}
	return p
}

// inProcess runs o.clients callers of engine.Analyze on req back to back
// for o.duration (at most o.maxCalls calls) in this process.
func inProcess(o options, req *kinchainv1.AnalyzeCaptureRequest) reference {
	eng := engine.New(engine.Config{})
	ctx := context.Background()
	_, _ = eng.Analyze(ctx, req) // warm up
	cpu0 := procstat.Self()
	calls, elapsed := backToBack(o, func() { _, _ = eng.Analyze(ctx, req) })
	if calls == 0 {
		return reference{}
	}
	return reference{Calls: calls, PerSecond: float64(calls) / elapsed.Seconds(), CPUms: perCall(procstat.Self()-cpu0, calls)}
}

// backToBack calls f from o.clients goroutines, each call after the
// previous one, for o.duration and at most o.maxCalls calls in all; it
// returns the calls made and the time they took.
func backToBack(o options, f func()) (int, time.Duration) {
	end := time.Now().Add(o.duration)
	start := time.Now()
	var mu sync.Mutex
	calls := 0
	var wg sync.WaitGroup
	for i := 0; i < o.clients; i++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for time.Now().Before(end) {
				mu.Lock()
				if calls >= o.maxCalls {
					mu.Unlock()
					return
				}
				calls++
				mu.Unlock()
				f()
			}
		}()
	}
	wg.Wait()
	return calls, time.Since(start)
}

func perCall(d time.Duration, n int) float64 {
	return float64(d) / float64(time.Millisecond) / float64(n)
}

// cpu is the server process's CPU time so far; false without a child
// server or when /proc cannot be read.
func (c *child) cpu() (time.Duration, bool) {
	if c == nil {
		return 0, false
	}
	d, err := procstat.CPU(c.cmd.Process.Pid)
	return d, err == nil
}

// openLoop starts calls at rate per second for o.duration, each in its own
// goroutine, whatever the answers; at most 4096 are outstanding.
func openLoop(o options, name string, rate float64, call func(context.Context) (string, error), srv *child) phase {
	var rec recorder
	interval := time.Duration(float64(time.Second) / rate)
	start := time.Now()
	n := min(o.maxCalls, int(o.duration.Seconds()*rate)+1)
	sem := make(chan struct{}, 4096)
	var wg sync.WaitGroup
	for i := 0; i < n; i++ {
		due := start.Add(time.Duration(i) * interval)
		if d := time.Until(due); d > 0 {
			time.Sleep(d)
		}
		sem <- struct{}{}
		wg.Add(1)
		go func() {
			defer wg.Done()
			defer func() { <-sem }()
			ctx, cancel := context.WithTimeout(context.Background(), 30*time.Second)
			code, _ := call(ctx)
			cancel()
			rec.add(code, time.Since(due))
		}()
	}
	wg.Wait()
	return rec.phase(name+" (open loop)", rate, time.Since(start), srv)
}

// printJSON prints v as indented JSON.
func printJSON(w io.Writer, v any) {
	b, _ := json.MarshalIndent(v, "", "  ")
	fmt.Fprintln(w, string(b))
}

func printReport(w io.Writer, r report, asJSON bool) {
	if asJSON {
		printJSON(w, r)
		return
	}
	fmt.Fprintf(w, "kinchain load: %s, server %s, %.0f s per phase\n", r.Transport, r.Server, r.PhaseSeconds)
	fmt.Fprintf(w, "%-26s %9s %7s %7s %9s %9s %9s %9s %9s %9s  %s\n", "phase", "offered/s", "calls", "ok", "ok/s", "p50 ok ms", "p99 ok ms", "p50 all", "p99 all", "peak RSS", "codes")
	for _, p := range r.Phases {
		offered := "-"
		if p.OfferedRate > 0 {
			offered = fmt.Sprintf("%.1f", p.OfferedRate)
		}
		rss := "-"
		if p.PeakRSSMiB > 0 {
			rss = fmt.Sprintf("%.0f MiB", p.PeakRSSMiB)
		}
		var codes []string
		for k, v := range p.Codes {
			codes = append(codes, fmt.Sprintf("%s=%d", k, v))
		}
		slices.Sort(codes)
		fmt.Fprintf(w, "%-26s %9s %7d %7d %9.1f %9.1f %9.1f %9.1f %9.1f %9s  %s\n", p.Name, offered, p.Calls, p.OK, p.OKPerSecond,
			p.P50OKms, p.P99OKms, p.P50Allms, p.P99Allms, rss, strings.Join(codes, " "))
	}
	if r.PeakRSSMiB > 0 {
		fmt.Fprintf(w, "server peak RSS (VmHWM of the child process): %.0f MiB\n", r.PeakRSSMiB)
	}
	if r.InProcess.Calls > 0 {
		fmt.Fprintf(w, "in-process reference (engine.Analyze in this process, same callers, server idle): %.1f analyses/s, %.2f ms CPU per analysis\n",
			r.InProcess.PerSecond, r.InProcess.CPUms)
	}
	if len(r.Phases) > 0 && r.Phases[0].ClientCPUms > 0 {
		p := r.Phases[0]
		fmt.Fprintf(w, "capacity phase: client %.2f ms CPU per call", p.ClientCPUms)
		if p.ServerCPUms > 0 {
			fmt.Fprintf(w, ", server %.2f ms CPU per call", p.ServerCPUms)
		}
		fmt.Fprintf(w, "; ok/s over in-process analyses/s %.0f %% (client and server share the machine)", 100*r.WallRatio)
		if r.CPURatio > 0 {
			fmt.Fprintf(w, "; in-process CPU over server CPU per call %.0f %% (the server on a machine of its own)", 100*r.CPURatio)
		}
		fmt.Fprintln(w)
	}
}
