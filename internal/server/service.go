package server

import (
	"context"
	"io"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
)

// Analyzer is the analysis engine as the server sees it. Bad input must come
// back as *validate.Error values (alone or joined); context errors are
// reported as CANCELED or DEADLINE_EXCEEDED; anything else is INTERNAL.
// Implementations must be safe for concurrent use.
type Analyzer interface {
	// Analyze validates and analyses a whole capture.
	Analyze(ctx context.Context, req *kinchainv1.AnalyzeCaptureRequest) (*kinchainv1.AnalyzeCaptureResponse, error)
	// AnalyzeCSV decodes a capture in the CSV capture format from r and
	// analyses it with opts.
	AnalyzeCSV(ctx context.Context, r io.Reader, opts *kinchainv1.AnalysisOptions) (*kinchainv1.AnalyzeCaptureResponse, error)
}

// StreamSession is one live stream's analysis state (internal/stream's
// Session). It is used from one goroutine at a time.
type StreamSession interface {
	// Push adds a batch and returns the events and swing reports that
	// became known; an error (bad samples: *validate.Error) ends the stream.
	Push(b *kinchainv1.SampleBatch) ([]*kinchainv1.StreamCaptureResponse, error)
	// Close ends the stream and returns the remaining reports and the final
	// summary.
	Close() []*kinchainv1.StreamCaptureResponse
}

// StreamFactory opens a session for a stream's header; a bad header yields
// a *validate.Error. A nil StreamFactory disables StreamCapture
// (UNIMPLEMENTED).
type StreamFactory func(h *kinchainv1.StreamHeader) (StreamSession, error)

// service implements kinchainv1.KinematicsServiceServer. Its methods only
// translate between the wire and the engine; limits, deadlines, logging and
// metrics are interceptors (gRPC) or middleware (HTTP).
type service struct {
	kinchainv1.UnimplementedKinematicsServiceServer
	s *Server
}

// AnalyzeCapture analyses a whole capture.
func (v *service) AnalyzeCapture(ctx context.Context, req *kinchainv1.AnalyzeCaptureRequest) (*kinchainv1.AnalyzeCaptureResponse, error) {
	resp, err := v.s.analyzer.Analyze(ctx, req)
	if err != nil {
		return nil, v.s.toStatus(ctx, err, scopeRequest)
	}
	v.s.metrics.observeResponse(resp)
	return resp, nil
}

// StreamCapture runs the streaming protocol (see stream.go).
func (v *service) StreamCapture(ss kinchainv1.KinematicsService_StreamCaptureServer) error {
	return v.s.runStream(ss)
}
