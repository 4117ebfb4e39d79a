package main

import (
	"context"
	"errors"
	"fmt"
	"io"
	"math"
	"slices"
	"strings"
	"sync"
	"time"

	"google.golang.org/grpc"
	"google.golang.org/grpc/credentials/insecure"
	"google.golang.org/grpc/encoding"
	"google.golang.org/grpc/status"
	"google.golang.org/protobuf/proto"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/procstat"
	"github.com/kinchain/kinchain/internal/stream"
	"github.com/kinchain/kinchain/internal/synth"
)

// Live streams (-transport stream).
//
// -streams StreamCapture calls at once, each replaying the same synthetic
// session — six segments at 1000 Hz, full swings about 3.9 s apart, as
// many as fit in -duration (at least one) — at its recorded pace, in
// batches of -batch-ms (default 10 ms), the starts spread over the first
// second. Every
// message is encoded once, before the run, and sent as bytes, so the
// client's CPU is the transport's. The figures:
//
//   - server CPU per stream-second (from /proc) and what it implies: the
//     live 1 kHz streams the machine's cores could carry;
//   - send lag: how late each batch left against its schedule. A server
//     that does not keep up stops reading, HTTP/2 flow control stops the
//     sender and the lag grows without bound; a server that keeps up
//     leaves it at scheduling noise;
//   - impact latency: wall time from the sending of the batch that holds
//     a swing's impact sample to the arrival of that impact event;
//   - the streams that did not end OK with a summary (the exit status is
//     1 when there is any, or no impact event arrived).

// streamSession is the replayed session, encoded.
type streamSession struct {
	header  []byte
	batches [][]byte
	ends    []float64 // stream time at which each batch is complete
	impacts []float64 // stream times of the impacts
	t0      float64   // first sample time
	seconds float64
}

func newStreamSession(d time.Duration, batch float64) (*streamSession, error) {
	swings := max(1, int(math.Round(d.Seconds()/3.9)))
	c, truth, err := synth.Generate(synth.Config{Rate: 1000, Swings: swings, Segments: []kinchainv1.Segment{
		kinchainv1.Segment_SEGMENT_PELVIS, kinchainv1.Segment_SEGMENT_THORAX,
		kinchainv1.Segment_SEGMENT_LEAD_UPPER_ARM, kinchainv1.Segment_SEGMENT_LEAD_FOREARM,
		kinchainv1.Segment_SEGMENT_LEAD_HAND, kinchainv1.Segment_SEGMENT_CLUB,
	}})
	if err != nil {
		return nil, err
	}
	h, err := stream.HeaderFor(c, nil)
	if err != nil {
		return nil, err
	}
	s := &streamSession{t0: math.Inf(1)}
	if s.header, err = proto.Marshal(&kinchainv1.StreamCaptureRequest{Message: &kinchainv1.StreamCaptureRequest_Header{Header: h}}); err != nil {
		return nil, err
	}
	last := math.Inf(-1)
	for _, t := range c.GetTracks() {
		ts := t.GetTimeS()
		s.t0, last = math.Min(s.t0, ts[0]), math.Max(last, ts[len(ts)-1])
	}
	s.seconds = last - s.t0
	err = stream.Split(c, batch, func(b *kinchainv1.SampleBatch, end float64) error {
		m, err := proto.Marshal(&kinchainv1.StreamCaptureRequest{Message: &kinchainv1.StreamCaptureRequest_Batch{Batch: b}})
		s.batches, s.ends = append(s.batches, m), append(s.ends, end)
		return err
	})
	for _, sw := range truth.Swings {
		s.impacts = append(s.impacts, sw.Impact)
	}
	return s, err
}

// streamResult is one stream's outcome.
type streamResult struct {
	lags     []time.Duration // per batch: sent − due
	impacts  []time.Duration // per impact event received
	err      error
	summary  bool
	duration time.Duration
}

// streamReport is the report of -transport stream.
type streamReport struct {
	Server             string         `json:"server"`
	Streams            int            `json:"streams"`
	SessionSeconds     float64        `json:"session_seconds"`
	SwingsPerStream    int            `json:"swings_per_stream"`
	BatchMs            float64        `json:"batch_ms"`
	WallSeconds        float64        `json:"wall_seconds"`
	OK                 int            `json:"ok"`
	Codes              map[string]int `json:"codes"`
	ServerCPUmsPerSec  float64        `json:"server_cpu_ms_per_stream_second,omitempty"`
	SteadyFromS        float64        `json:"steady_from_s,omitempty"`
	SteadyToS          float64        `json:"steady_to_s,omitempty"`
	SteadyCPUmsPerSec  float64        `json:"steady_server_cpu_ms_per_stream_second,omitempty"`
	ClientCPUmsPerSec  float64        `json:"client_cpu_ms_per_stream_second"`
	StreamsPerCore     float64        `json:"streams_per_core,omitempty"`
	SteadyPerCore      float64        `json:"steady_streams_per_core,omitempty"`
	SendLagP50ms       float64        `json:"send_lag_p50_ms"`
	SendLagP99ms       float64        `json:"send_lag_p99_ms"`
	SendLagMaxms       float64        `json:"send_lag_max_ms"`
	ImpactEvents       int            `json:"impact_events"`
	ImpactLatencyP50ms float64        `json:"impact_latency_p50_ms"`
	ImpactLatencyP99ms float64        `json:"impact_latency_p99_ms"`
	PeakRSSMiB         float64        `json:"server_peak_rss_mib,omitempty"`
}

func runStreams(o options, out io.Writer) error {
	sess, err := newStreamSession(o.duration, o.batchMs/1000)
	if err != nil {
		return err
	}
	srv, addr, err := serverFor(o)
	if err != nil {
		return err
	}
	if srv != nil {
		defer srv.stop()
	}
	// A connection per 100 streams (HTTP/2 multiplexes them).
	var conns []*grpc.ClientConn
	defer func() {
		for _, cc := range conns {
			cc.Close()
		}
	}()
	for i := 0; i < (o.streams+99)/100; i++ {
		cc, err := grpc.NewClient(addr, grpc.WithTransportCredentials(insecure.NewCredentials()))
		if err != nil {
			return err
		}
		conns = append(conns, cc)
	}

	rep := streamReport{Server: "external " + addr, Streams: o.streams, SessionSeconds: sess.seconds,
		SwingsPerStream: len(sess.impacts), BatchMs: o.batchMs, Codes: map[string]int{}}
	if srv != nil {
		rep.Server = fmt.Sprintf("child process %d (%s), -max-streams %d", srv.cmd.Process.Pid, srv.how, o.streams)
	}
	results := make([]streamResult, o.streams)
	self0 := procstat.Self()
	server0, serverOK := srv.cpu()
	start := time.Now()
	// The steady window: every stream is open, the rings have filled
	// (stream.Limits.MaxBufferedSeconds is 12 s) and the heap has grown to
	// its working size, so page faults of first use are behind.
	steadyFrom := math.Min(15, sess.seconds/2)
	steadyTo := sess.seconds
	steady := make(chan [2]time.Duration, 1)
	if srv != nil && steadyTo-steadyFrom >= 5 {
		go func() {
			time.Sleep(time.Until(start.Add(time.Duration(steadyFrom * float64(time.Second)))))
			a, ok1 := srv.cpu()
			time.Sleep(time.Until(start.Add(time.Duration(steadyTo * float64(time.Second)))))
			b, ok2 := srv.cpu()
			if ok1 && ok2 {
				steady <- [2]time.Duration{a, b}
			}
			close(steady)
		}()
	} else {
		close(steady)
	}
	var wg sync.WaitGroup
	for i := range results {
		wg.Add(1)
		go func() {
			defer wg.Done()
			offset := time.Duration(float64(time.Second) * float64(i) / float64(o.streams))
			results[i] = runStream(conns[i%len(conns)], sess, start.Add(offset))
		}()
	}
	wg.Wait()
	wall := time.Since(start)
	streamSeconds := float64(o.streams) * sess.seconds
	rep.WallSeconds = wall.Seconds()
	rep.ClientCPUmsPerSec = float64(procstat.Self()-self0) / float64(time.Millisecond) / streamSeconds
	if srv != nil {
		if server1, ok := srv.cpu(); ok && serverOK && server1 > server0 {
			rep.ServerCPUmsPerSec = float64(server1-server0) / float64(time.Millisecond) / streamSeconds
			rep.StreamsPerCore = 1000 / rep.ServerCPUmsPerSec
		}
		rep.PeakRSSMiB = srv.hwm()
	}
	if w, ok := <-steady; ok && w[1] > w[0] {
		rep.SteadyFromS, rep.SteadyToS = steadyFrom, steadyTo
		rep.SteadyCPUmsPerSec = float64(w[1]-w[0]) / float64(time.Millisecond) / (float64(o.streams) * (steadyTo - steadyFrom))
		rep.SteadyPerCore = 1000 / rep.SteadyCPUmsPerSec
	}
	var lags, impacts []time.Duration
	for _, r := range results {
		lags = append(lags, r.lags...)
		impacts = append(impacts, r.impacts...)
		switch {
		case r.err != nil:
			rep.Codes[status.Code(r.err).String()]++
		case !r.summary:
			rep.Codes["no summary"]++
		default:
			rep.OK++
			rep.Codes["OK"]++
		}
	}
	rep.SendLagP50ms, rep.SendLagP99ms = pct(lags, 0.5), pct(lags, 0.99)
	if len(lags) > 0 {
		rep.SendLagMaxms = float64(slices.Max(lags).Microseconds()) / 1000
	}
	rep.ImpactEvents = len(impacts)
	rep.ImpactLatencyP50ms, rep.ImpactLatencyP99ms = pct(impacts, 0.5), pct(impacts, 0.99)
	printStreamReport(out, rep, o.json)
	if rep.OK != o.streams {
		return fmt.Errorf("%d of %d streams did not end OK with a summary", o.streams-rep.OK, o.streams)
	}
	if rep.ImpactEvents == 0 {
		return errors.New("no impact event arrived")
	}
	return nil
}

// runStream replays sess on one StreamCapture call from start on.
func runStream(cc *grpc.ClientConn, sess *streamSession, start time.Time) streamResult {
	var res streamResult
	if d := time.Until(start); d > 0 {
		time.Sleep(d)
	}
	ctx, cancel := context.WithTimeout(context.Background(), time.Duration(sess.seconds*float64(time.Second))+time.Minute)
	defer cancel()
	desc := &grpc.StreamDesc{StreamName: "StreamCapture", ServerStreams: true, ClientStreams: true}
	cs, err := cc.NewStream(ctx, desc, kinchainv1.KinematicsService_StreamCapture_FullMethodName,
		grpc.ForceCodecV2(rawCodec{encoding.GetCodecV2("proto")}))
	if err != nil {
		res.err = err
		return res
	}
	// impactSent[k] is when the batch holding impact k left.
	impactSent := make([]time.Time, len(sess.impacts))
	var mu sync.Mutex
	recvDone := make(chan struct{})
	go func() {
		defer close(recvDone)
		for {
			m := &kinchainv1.StreamCaptureResponse{}
			if err := cs.RecvMsg(m); err != nil {
				if !errors.Is(err, io.EOF) {
					res.err = err
				}
				return
			}
			switch {
			case m.GetSummary() != nil:
				res.summary = true
			case m.GetEvent().GetEvent().GetKind() == kinchainv1.EventKind_EVENT_KIND_IMPACT:
				k := int(m.GetEvent().GetSwingIndex())
				mu.Lock()
				if k >= 0 && k < len(impactSent) && !impactSent[k].IsZero() {
					res.impacts = append(res.impacts, time.Since(impactSent[k]))
				}
				mu.Unlock()
			}
		}
	}()
	send := func(b []byte) error { return cs.SendMsg(&b) }
	err = send(sess.header)
	next := 0 // the next impact to look for
	t0 := time.Now()
	timer := time.NewTimer(0)
	<-timer.C
	for i := 0; err == nil && i < len(sess.batches); i++ {
		due := t0.Add(time.Duration((sess.ends[i] - sess.t0) * float64(time.Second)))
		if d := time.Until(due); d > 0 {
			timer.Reset(d)
			<-timer.C
		}
		if err = send(sess.batches[i]); err != nil {
			break
		}
		sent := time.Now()
		res.lags = append(res.lags, sent.Sub(due))
		for next < len(sess.impacts) && sess.ends[i] > sess.impacts[next] {
			mu.Lock()
			impactSent[next] = sent
			mu.Unlock()
			next++
		}
	}
	if err == nil {
		err = cs.CloseSend()
	}
	<-recvDone
	if res.err == nil && err != nil && !errors.Is(err, io.EOF) {
		res.err = err
	}
	res.duration = time.Since(start)
	return res
}

func printStreamReport(w io.Writer, r streamReport, asJSON bool) {
	if asJSON {
		printJSON(w, r)
		return
	}
	var codes []string
	for k, v := range r.Codes {
		codes = append(codes, fmt.Sprintf("%s=%d", k, v))
	}
	slices.Sort(codes)
	fmt.Fprintf(w, "kinchain load: %d live streams, server %s\n", r.Streams, r.Server)
	fmt.Fprintf(w, "each: %.1f s of a six-segment 1000 Hz session with %d swings, in %.0f ms batches at its recorded pace; %.1f s in all\n",
		r.SessionSeconds, r.SwingsPerStream, r.BatchMs, r.WallSeconds)
	fmt.Fprintf(w, "streams: %s\n", strings.Join(codes, " "))
	if r.ServerCPUmsPerSec > 0 {
		fmt.Fprintf(w, "server CPU: %.2f ms per stream-second → %.0f live streams per core\n", r.ServerCPUmsPerSec, r.StreamsPerCore)
	}
	if r.SteadyCPUmsPerSec > 0 {
		fmt.Fprintf(w, "server CPU, steady (%.0f–%.0f s, all streams open, buffers full): %.2f ms per stream-second → %.0f live streams per core\n",
			r.SteadyFromS, r.SteadyToS, r.SteadyCPUmsPerSec, r.SteadyPerCore)
	}
	fmt.Fprintf(w, "client CPU: %.2f ms per stream-second\n", r.ClientCPUmsPerSec)
	fmt.Fprintf(w, "send lag against the schedule: p50 %.1f ms, p99 %.1f ms, max %.1f ms\n", r.SendLagP50ms, r.SendLagP99ms, r.SendLagMaxms)
	fmt.Fprintf(w, "impact events: %d, latency from the impact batch's send: p50 %.1f ms, p99 %.1f ms\n", r.ImpactEvents, r.ImpactLatencyP50ms, r.ImpactLatencyP99ms)
	if r.PeakRSSMiB > 0 {
		fmt.Fprintf(w, "server peak RSS (VmHWM of the child process): %.0f MiB\n", r.PeakRSSMiB)
	}
}
