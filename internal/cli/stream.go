package cli

import (
	"context"
	"crypto/tls"
	"crypto/x509"
	"errors"
	"flag"
	"fmt"
	"io"
	"math"
	"os"
	"strings"
	"time"

	"google.golang.org/grpc"
	"google.golang.org/grpc/credentials"
	"google.golang.org/grpc/credentials/insecure"
	"google.golang.org/grpc/status"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/encode"
	"github.com/kinchain/kinchain/internal/server"
	"github.com/kinchain/kinchain/internal/stream"
	"github.com/kinchain/kinchain/internal/validate"
)

const streamUsage = `Usage: kinchain stream [flags] FILE|-   (or --demo)

Replays a capture to a kinchain server over the StreamCapture API, at the
pace it was recorded (--pace) in batches of --batch-ms of stream time, and
prints what the server sends as it arrives: each event on one line (the
stream time it was decided, the swing, the event, its time and the
detection latency), each swing's report in short, and the closing summary.

FILE is a capture in CSV (.csv), protojson (.json) or binary protobuf (.pb).

Flags:
`

// Limits of the stream flags.
const (
	maxBatchMs = 10_000.0
	maxPace    = 1e6
)

// RunStream implements `kinchain stream`: a reference client of the
// streaming API. It reads and validates the capture locally (errors name
// the file line), announces it with stream.HeaderFor, sends it in batches
// cut by stream.Split, paced by the wall clock unless --pace is 0, and
// prints the server's responses as they arrive. A refusal by the server
// (INVALID_ARGUMENT and the like) is returned as an error after whatever
// arrived before it was printed.
func RunStream(ctx context.Context, args []string, stdin io.Reader, stdout, stderr io.Writer) error {
	fs := flag.NewFlagSet("stream", flag.ContinueOnError)
	fs.SetOutput(stderr)
	fs.Usage = func() {
		io.WriteString(stderr, streamUsage)
		fs.PrintDefaults()
	}
	var af analysisFlags
	af.register(fs)
	addr := fs.String("addr", server.DefaultGRPCAddr, "server gRPC address HOST:PORT")
	pace := fs.Float64("pace", 1, "replay pace: 1 is the recorded pace, 2 twice as fast, 0 as fast as possible (--speed is the speed definition)")
	batchMs := fs.Float64("batch-ms", 10, "stream time per batch, ms")
	useTLS := fs.Bool("tls", false, "connect with TLS, trusting the system's roots (or --ca)")
	caFile := fs.String("ca", "", "PEM file of the certificate authority to trust (implies --tls)")
	certFile := fs.String("cert", "", "PEM client certificate for mutual TLS (with --key; implies --tls)")
	keyFile := fs.String("key", "", "PEM private key of --cert")
	token := fs.String("token", os.Getenv("KINCHAIN_TOKEN"), "bearer token sent with the call (default $KINCHAIN_TOKEN)")
	pos, err := parseArgs(fs, args)
	if err != nil {
		return err
	}
	switch {
	case *addr == "":
		return usagef("--addr: give the server's HOST:PORT")
	case !(*pace >= 0) || *pace > maxPace:
		return usagef("--pace: %v is not a multiplier in 0..%g (0: as fast as possible)", *pace, maxPace)
	case !(*batchMs > 0) || *batchMs > maxBatchMs:
		return usagef("--batch-ms: %v is not in (0, %g] ms", *batchMs, maxBatchMs)
	}
	opts, err := af.options()
	if err != nil {
		return err
	}
	lim := validate.DefaultLimits()
	pc, loc, name, err := af.decodeCapture(pos, stdin, lim)
	if err != nil {
		return err
	}
	if _, err := validate.Capture(pc, lim, loc); err != nil {
		return fmt.Errorf("%s: %w", name, err)
	}
	h, err := stream.HeaderFor(pc, opts)
	if err != nil {
		return fmt.Errorf("%s: %w", name, err)
	}
	creds, err := streamCredentials(*useTLS, *caFile, *certFile, *keyFile)
	if err != nil {
		return err
	}
	dial := []grpc.DialOption{grpc.WithTransportCredentials(creds)}
	if *token != "" {
		dial = append(dial, grpc.WithPerRPCCredentials(bearer{token: *token, secure: creds.Info().SecurityProtocol == "tls"}))
	}
	conn, err := grpc.NewClient(*addr, dial...)
	if err != nil {
		return fmt.Errorf("--addr %s: %w", *addr, err)
	}
	defer conn.Close()

	call, err := kinchainv1.NewKinematicsServiceClient(conn).StreamCapture(ctx)
	if err != nil {
		return fmt.Errorf("%s: %w", *addr, err)
	}
	p := &streamPrinter{w: stdout}
	p.header(name, h, *addr, *batchMs, *pace)

	// One goroutine prints what arrives; when the call ends (the summary
	// and the server's status, or a refusal) it stops the sender, which
	// paces the batches here.
	sendCtx, stopSend := context.WithCancel(ctx)
	defer stopSend()
	recvDone := make(chan error, 1)
	go func() {
		err := p.receive(call)
		stopSend()
		recvDone <- err
	}()
	sendErr := sendCapture(sendCtx, call, h, pc, *batchMs/1000, *pace)
	if sendErr == nil {
		sendErr = call.CloseSend()
	}
	recvErr := <-recvDone
	switch {
	case ctx.Err() != nil:
		return ctx.Err()
	case recvErr != nil:
		return streamError(*addr, recvErr)
	case sendErr != nil && !errors.Is(sendErr, io.EOF) && !errors.Is(sendErr, context.Canceled):
		return streamError(*addr, sendErr)
	}
	return p.err
}

// sendCapture sends the header and the batches of pc; with pace > 0 batch
// k leaves when the wall clock has run (end_k − t0)/pace since the start,
// end_k the end of its span of stream time. io.EOF means the server ended
// the call (its status is then what Recv reports).
func sendCapture(ctx context.Context, call kinchainv1.KinematicsService_StreamCaptureClient, h *kinchainv1.StreamHeader,
	pc *kinchainv1.Capture, span, pace float64) error {
	if err := call.Send(&kinchainv1.StreamCaptureRequest{Message: &kinchainv1.StreamCaptureRequest_Header{Header: h}}); err != nil {
		return err
	}
	start := time.Now()
	t0 := math.Inf(1)
	for _, t := range pc.GetTracks() {
		if ts := t.GetTimeS(); len(ts) > 0 {
			t0 = math.Min(t0, ts[0])
		}
	}
	timer := time.NewTimer(0)
	defer timer.Stop()
	<-timer.C
	return stream.Split(pc, span, func(b *kinchainv1.SampleBatch, end float64) error {
		if pace > 0 {
			due := start.Add(time.Duration((end - t0) / pace * float64(time.Second)))
			if d := time.Until(due); d > 0 {
				timer.Reset(d)
				select {
				case <-timer.C:
				case <-ctx.Done():
					return ctx.Err()
				}
			}
		}
		return call.Send(&kinchainv1.StreamCaptureRequest{Message: &kinchainv1.StreamCaptureRequest_Batch{Batch: b}})
	})
}

// streamCredentials returns the transport credentials: plain text by
// default, TLS with the system roots with --tls, or with the roots of
// caFile.
func streamCredentials(useTLS bool, caFile, certFile, keyFile string) (credentials.TransportCredentials, error) {
	if (certFile == "") != (keyFile == "") {
		return nil, usagef("--cert and --key go together")
	}
	if caFile == "" && certFile == "" && !useTLS {
		return insecure.NewCredentials(), nil
	}
	cfg := &tls.Config{MinVersion: tls.VersionTLS12}
	if certFile != "" {
		pair, err := tls.LoadX509KeyPair(certFile, keyFile)
		if err != nil {
			return nil, fmt.Errorf("--cert/--key: %w", err)
		}
		cfg.Certificates = []tls.Certificate{pair}
	}
	if caFile != "" {
		pem, err := os.ReadFile(caFile)
		if err != nil {
			return nil, fmt.Errorf("--ca: %w", err)
		}
		pool := x509.NewCertPool()
		if !pool.AppendCertsFromPEM(pem) {
			return nil, fmt.Errorf("--ca %s: no PEM certificate found", caFile)
		}
		cfg.RootCAs = pool
	}
	return credentials.NewTLS(cfg), nil
}

// bearer sends "authorization: Bearer TOKEN" with every call. Over a
// connection without TLS it is still sent (loopback tests, a mesh that
// encrypts for us), since the server decides what it accepts.
type bearer struct {
	token  string
	secure bool
}

// GetRequestMetadata implements credentials.PerRPCCredentials.
func (b bearer) GetRequestMetadata(context.Context, ...string) (map[string]string, error) {
	return map[string]string{"authorization": "Bearer " + b.token}, nil
}

// RequireTransportSecurity implements credentials.PerRPCCredentials.
func (b bearer) RequireTransportSecurity() bool { return false }

// streamError renders a failed call: the server's status code and message
// (with its field violations), or the transport error.
func streamError(addr string, err error) error {
	if st, ok := status.FromError(err); ok {
		return fmt.Errorf("%s: %s: %s", addr, st.Code(), st.Message())
	}
	return fmt.Errorf("%s: %w", addr, err)
}

// streamPrinter writes the server's responses as lines of text.
type streamPrinter struct {
	w   io.Writer
	err error // the first write error
}

func (p *streamPrinter) printf(format string, a ...any) {
	if p.err == nil {
		_, p.err = fmt.Fprintf(p.w, format, a...)
	}
}

func (p *streamPrinter) header(name string, h *kinchainv1.StreamHeader, addr string, batchMs, pace float64) {
	how := "as fast as possible"
	if pace > 0 {
		how = fmt.Sprintf("at %g× the recorded pace", pace)
	}
	p.printf("streaming %s (%d segments, %.6g Hz) to %s in %g ms batches, %s\n", name, len(h.GetSegments()), h.GetRateHz(), addr, batchMs, how)
	p.printf("%10s  %-5s  %-22s %10s  %s\n", "decided", "swing", "event", "time", "latency")
}

// receive prints responses until the call ends; nil on a clean end.
func (p *streamPrinter) receive(call kinchainv1.KinematicsService_StreamCaptureClient) error {
	for {
		r, err := call.Recv()
		if errors.Is(err, io.EOF) {
			return nil
		}
		if err != nil {
			return err
		}
		switch m := r.GetMessage().(type) {
		case *kinchainv1.StreamCaptureResponse_Event:
			p.event(m.Event)
		case *kinchainv1.StreamCaptureResponse_Swing:
			p.swing(m.Swing)
		case *kinchainv1.StreamCaptureResponse_Summary:
			p.summary(m.Summary)
		}
	}
}

func (p *streamPrinter) event(e *kinchainv1.StreamEvent) {
	ev := e.GetEvent()
	lat := (e.GetDetectedAtS() - ev.GetTimeS()) * 1000
	p.printf("%8.3f s  %5d  %-22s %8.4f s  %6.1f ms\n", e.GetDetectedAtS(), e.GetSwingIndex(), encode.EventLabel(ev.GetKind()), ev.GetTimeS(), lat)
}

func (p *streamPrinter) swing(r *kinchainv1.SwingReport) {
	var ev []string
	for _, e := range r.GetEvents() {
		ev = append(ev, fmt.Sprintf("%s %.3f s", encode.EventLabel(e.GetKind()), e.GetTimeS()))
	}
	p.printf("swing %d report: %s\n", r.GetIndex(), strings.Join(ev, ", "))
	if t := r.GetTempo(); t != nil {
		p.printf("  tempo %.2f s back, %.2f s down (%.1f : 1)\n", t.GetBackswingS(), t.GetDownswingS(), t.GetRatio())
	}
	if seq := r.GetSequence(); len(seq) > 0 {
		fastest := seq[0]
		for _, s := range seq {
			if s.GetPeakSpeedDegPerS() > fastest.GetPeakSpeedDegPerS() {
				fastest = s
			}
		}
		var order []string
		for _, s := range r.GetPeakOrder() {
			order = append(order, encode.SegmentName(s))
		}
		ptd := "not proximal to distal"
		if r.GetProximalToDistal() {
			ptd = "proximal to distal"
		}
		p.printf("  fastest %s %.0f °/s at %+.0f ms from impact; peaks %s (%s)\n",
			encode.SegmentName(fastest.GetSegment()), fastest.GetPeakSpeedDegPerS(), fastest.GetTimeFromImpactMs(), strings.Join(order, " → "), ptd)
	}
}

func (p *streamPrinter) summary(s *kinchainv1.StreamSummary) {
	plural := "s"
	if s.GetSwings() == 1 {
		plural = ""
	}
	ws := s.GetQuality().GetWarnings()
	p.printf("summary: %d samples over %.3f s, %d swing%s reported, %d warnings\n", s.GetSamples(), s.GetDurationS(), s.GetSwings(), plural, len(ws))
	for _, w := range ws {
		p.printf("  warning: %s\n", w.GetMessage())
	}
}
