package deploy

import (
	"context"
	"errors"
	"fmt"
	"io"
	"regexp"
	"strconv"
	"sync"
	"sync/atomic"
	"testing"
	"time"

	"google.golang.org/protobuf/proto"

	"github.com/kinchain/kinchain/api/client"
	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/procstat"
	"github.com/kinchain/kinchain/internal/server"
	"github.com/kinchain/kinchain/internal/synth"
)

// What one replica can take, measured on the binary the Dockerfile builds,
// run with the base ConfigMap's settings (loopback addresses), driven over
// gRPC from this test process on the same machine. Run:
//
//	cd deploy && go test -run '^$' -bench Capacity -benchtime 40x
//
// Reported per sub-benchmark, side by side in one run:
//
//	analyses/s         throughput at that concurrency
//	server-cpu-ms/op   the server process's CPU time (user + system) per analysis or stream
//	server-peak-MiB    the server's peak resident set during the sub-benchmark (VmHWM, reset before it)
//	samples/op         samples per analysis or stream
//	server-rss-MiB     (idle) the resident set of a server that has served nothing
//
// The figures in deploy/README.md ("Capacity per replica") come from this
// benchmark; TestResourcesMatchRunbook checks the manifests against them.

// maxRecvBytes is the body limit the pod runs with: KINCHAIN_MAX_RECV_BYTES,
// else the server's default.
func maxRecvBytes(tb testing.TB, env map[string]string) int {
	tb.Helper()
	v, ok := env[envForFlag("max-recv-bytes")]
	if !ok {
		return server.DefaultConfig().MaxRecvMsgBytes
	}
	m := regexp.MustCompile(`^(\d+)(B|KiB|MiB|GiB)?$`).FindStringSubmatch(v)
	if m == nil {
		tb.Fatalf("KINCHAIN_MAX_RECV_BYTES=%q: not understood by this check", v)
	}
	n, _ := strconv.Atoi(m[1])
	return n << map[string]uint{"": 0, "B": 0, "KiB": 10, "MiB": 20, "GiB": 30}[m[2]]
}

// captureSamples counts the samples of a capture.
func captureSamples(c *kinchainv1.Capture) int {
	n := 0
	for _, t := range c.GetTracks() {
		n += len(t.GetTimeS())
	}
	return n
}

// benchSegments are the six segments of internal/server's benchmark capture.
var benchSegments = []kinchainv1.Segment{
	kinchainv1.Segment_SEGMENT_PELVIS, kinchainv1.Segment_SEGMENT_THORAX,
	kinchainv1.Segment_SEGMENT_LEAD_UPPER_ARM, kinchainv1.Segment_SEGMENT_LEAD_FOREARM,
	kinchainv1.Segment_SEGMENT_LEAD_HAND, kinchainv1.Segment_SEGMENT_CLUB,
}

// measured wraps a sub-benchmark with the server-side measurements.
func measured(b *testing.B, pid int, samples int, f func()) {
	if err := procstat.ResetPeakRSS(pid); err != nil {
		b.Logf("cannot reset the peak RSS (%v); server-peak-MiB is the peak since start", err)
	}
	cpu0, err := procstat.CPU(pid)
	if err != nil {
		b.Fatal(err)
	}
	b.ResetTimer()
	f()
	b.StopTimer()
	cpu1, err := procstat.CPU(pid)
	if err != nil {
		b.Fatal(err)
	}
	peak, err := procstat.PeakRSS(pid)
	if err != nil {
		b.Fatal(err)
	}
	b.ReportMetric(float64(b.N)/b.Elapsed().Seconds(), "analyses/s")
	b.ReportMetric(float64((cpu1-cpu0).Milliseconds())/float64(b.N), "server-cpu-ms/op")
	b.ReportMetric(float64(peak)/(1<<20), "server-peak-MiB")
	b.ReportMetric(float64(samples), "samples/op")
}

// concurrently calls f b.N times from c goroutines.
func concurrently(b *testing.B, c int, f func() error) {
	var next atomic.Int64
	var failed atomic.Bool
	var wg sync.WaitGroup
	for i := 0; i < c; i++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for next.Add(1) <= int64(b.N) && !failed.Load() {
				if err := f(); err != nil {
					failed.Store(true)
					b.Error(err)
					return
				}
			}
		}()
	}
	wg.Wait()
}

// streamCapture sends capture c as one StreamCapture call in batches of
// batchS seconds and reads the stream to its end.
func streamCapture(ctx context.Context, cl *client.Client, c *kinchainv1.Capture, rate, batchS float64) error {
	st, err := cl.Stream(ctx)
	if err != nil {
		return err
	}
	h := &kinchainv1.StreamHeader{CaptureId: c.GetCaptureId(), Handedness: c.GetHandedness(), RateHz: rate}
	for _, t := range c.GetTracks() {
		h.Segments = append(h.Segments, t.GetSegment())
	}
	if err := st.Send(&kinchainv1.StreamCaptureRequest{Message: &kinchainv1.StreamCaptureRequest_Header{Header: h}}); err != nil {
		return err
	}
	n := len(c.GetTracks()[0].GetTimeS())
	step := int(batchS * rate)
	for i := 0; i < n; i += step {
		j := min(i+step, n)
		bt := &kinchainv1.SampleBatch{}
		for _, t := range c.GetTracks() {
			bt.Tracks = append(bt.Tracks, &kinchainv1.Track{Segment: t.GetSegment(),
				TimeS: t.TimeS[i:j], Qw: t.Qw[i:j], Qx: t.Qx[i:j], Qy: t.Qy[i:j], Qz: t.Qz[i:j]})
		}
		if err := st.Send(&kinchainv1.StreamCaptureRequest{Message: &kinchainv1.StreamCaptureRequest_Batch{Batch: bt}}); err != nil {
			return err
		}
	}
	if err := st.CloseSend(); err != nil {
		return err
	}
	summary := false
	for {
		r, err := st.Recv()
		if err == io.EOF {
			break
		}
		if err != nil {
			return err
		}
		if r.GetSummary() != nil {
			summary = true
		}
	}
	if !summary {
		return errors.New("stream ended without a summary")
	}
	return nil
}

func BenchmarkCapacity(b *testing.B) {
	base := buildKustomization(b, "base")
	env := containerEnv(b, base, serverContainer(b, deploymentOf(b, base)))
	d, err := parseDockerfile("Dockerfile")
	if err != nil {
		b.Fatal(err)
	}
	fenv, err := stageEnv(d.final(), nil)
	if err != nil {
		b.Fatal(err)
	}
	var penv []string
	for k, v := range fenv {
		penv = append(penv, k+"="+v)
	}
	for k, v := range env {
		penv = append(penv, k+"="+v)
	}
	bin := kinchainBinary(b)
	// Each sub-benchmark gets a fresh server, so that its peak resident set
	// is its own (Go returns freed memory to the kernel only gradually).
	fresh := func(b *testing.B) (int, *client.Client) {
		p := startServe(b, bin, serveOpts{args: loopbackArgs, env: penv})
		cl, err := client.New("passthrough:///"+p.bound.GRPC, client.Options{Timeout: 5 * time.Minute})
		if err != nil {
			b.Fatal(err)
		}
		b.Cleanup(func() { cl.Close() })
		return p.cmd.Process.Pid, cl
	}
	b.Run("idle", func(b *testing.B) {
		pid, _ := fresh(b)
		rss, err := procstat.RSS(pid)
		if err != nil {
			b.Fatal(err)
		}
		b.ReportMetric(float64(rss)/(1<<20), "server-rss-MiB")
	})
	ctx := context.Background()

	small, _, err := synth.Generate(synth.Config{Rate: 1000, Duration: 3, LeadIn: 0.5, Tail: 0.3, Segments: benchSegments})
	if err != nil {
		b.Fatal(err)
	}
	// A long session: ten full swings, all ten segments, 1 kHz.
	large, _, err := synth.Generate(synth.Config{Rate: 1000, Swings: 10})
	if err != nil {
		b.Fatal(err)
	}
	// The largest capture the body limit (KINCHAIN_MAX_RECV_BYTES) lets
	// through: ten segments at 1 kHz,
	limit := maxRecvBytes(b, env)
	// the synthesiser's most swings (20), the time between them stretched
	// (Pause) until the capture nearly fills the limit.
	sizeOf := func(pause float64) (*kinchainv1.Capture, int) {
		c, _, err := synth.Generate(synth.Config{Rate: 1000, Swings: 20, Pause: pause})
		if err != nil {
			b.Fatal(err)
		}
		return c, proto.Size(&kinchainv1.AnalyzeCaptureRequest{Capture: c})
	}
	_, s1 := sizeOf(1)
	_, s2 := sizeOf(2)
	var huge *kinchainv1.Capture
	for pause := 1 + float64(limit-s1)/float64(s2-s1); pause >= 1 && huge == nil; pause -= 0.1 {
		if c, n := sizeOf(pause); n < limit-(1<<10) {
			huge = c
		}
	}
	if huge == nil {
		b.Fatal("no synthetic capture fits under the body limit")
	}
	maxReq, _ := strconv.Atoi(env["KINCHAIN_MAX_REQUESTS"])
	if maxReq == 0 {
		b.Fatal("the base ConfigMap sets no KINCHAIN_MAX_REQUESTS")
	}
	for _, tc := range []struct {
		name string
		c    *kinchainv1.Capture
		conc []int
	}{
		{"swing3s", small, []int{1, 2, maxReq}},
		{"session", large, []int{1, maxReq}},
		{"maxbody", huge, []int{1, 2, maxReq}},
	} {
		size := proto.Size(tc.c)
		for _, conc := range tc.conc {
			b.Run(fmt.Sprintf("unary-%s/c=%d", tc.name, conc), func(b *testing.B) {
				b.SetBytes(int64(size))
				pid, cl := fresh(b)
				measured(b, pid, captureSamples(tc.c), func() {
					concurrently(b, conc, func() error { _, err := cl.Analyze(ctx, tc.c, nil); return err })
				})
			})
		}
	}
	maxStreams, _ := strconv.Atoi(env["KINCHAIN_MAX_STREAMS"])
	if maxStreams == 0 {
		b.Fatal("the base ConfigMap sets no KINCHAIN_MAX_STREAMS")
	}
	// Streams: the three-swing model golfer, all ten segments at 1 kHz (the
	// ring buffers fill), sent as fast as the server takes it in 100 ms
	// batches; every stream slot in use at once.
	streamed, _, err := synth.Generate(synth.Config{Rate: 1000, Swings: 3})
	if err != nil {
		b.Fatal(err)
	}
	b.Run(fmt.Sprintf("stream-session/c=%d", maxStreams), func(b *testing.B) {
		pid, cl := fresh(b)
		measured(b, pid, captureSamples(streamed), func() {
			concurrently(b, maxStreams, func() error { return streamCapture(ctx, cl, streamed, 1000, 0.1) })
		})
	})
}
