package server

import (
	"context"
	"errors"
	"fmt"
	"log/slog"
	"strings"
	"time"

	"google.golang.org/genproto/googleapis/rpc/errdetails"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"
	"google.golang.org/protobuf/protoadapt"
	"google.golang.org/protobuf/types/known/durationpb"

	"github.com/kinchain/kinchain/internal/validate"
)

// Error mapping (see DEVELOPERS.md, Service, "Errors"):
//
//	*validate.Error (one or joined)  → INVALID_ARGUMENT + BadRequest field violations (HTTP 400)
//	context.Canceled                 → CANCELED (HTTP 499)
//	context.DeadlineExceeded         → DEADLINE_EXCEEDED (HTTP 504)
//	a gRPC status error              → unchanged
//	anything else                    → INTERNAL, logged with the request id, no detail to the client (HTTP 500)

// scope says what message the field paths of validation errors are
// relative to.
type scope int

const (
	// scopeRequest: AnalyzeCaptureRequest. The validator's capture-relative
	// paths get "capture." in front; "capture" and "options.…" stay.
	scopeRequest scope = iota
	// scopeCSV: a CSV body; paths stay as the decoder gives them (tracks,
	// columns), line numbers are in the description; no path is "body".
	scopeCSV
	// scopeHeader: a StreamHeader; paths get "header." in front.
	scopeHeader
	// scopeBatch: a SampleBatch; paths get "batch." in front.
	scopeBatch
	// scopeStream: a StreamCaptureRequest; paths stay ("message").
	scopeStream
	// scopeBody: decoding errors of a request body whose paths are
	// already relative to the request (decode.JSONRequest,
	// decodeAnalyzeRequest); they stay, a path-less error names "body".
	scopeBody
)

// path turns a validator's field path into one relative to the scope's
// message.
func (sc scope) path(field string) string {
	switch sc {
	case scopeRequest:
		if field == "" {
			return "capture"
		}
		if field == "capture" || field == "options" || strings.HasPrefix(field, "capture.") || strings.HasPrefix(field, "options.") {
			return field
		}
		return "capture." + field
	case scopeCSV:
		if field == "" {
			return "body"
		}
		return field
	case scopeBody:
		if field == "" {
			return "body"
		}
		return field
	case scopeStream:
		if field == "" {
			return "message"
		}
		return field
	case scopeHeader:
		return withPrefix("header", field)
	case scopeBatch:
		return withPrefix("batch", field)
	}
	return field
}

func (sc scope) label() string {
	switch sc {
	case scopeHeader:
		return "header"
	case scopeBatch:
		return "batch"
	}
	return ""
}

// toStatus maps an error from the engine or a stream session to a gRPC
// status error, with validation field paths made relative to sc. Validation failures are counted by
// reason; internal errors are logged (never capture data: the log line has
// the error text and the request id only).
func (s *Server) toStatus(ctx context.Context, err error, sc scope) error {
	if err == nil {
		return nil
	}
	if _, ok := err.(interface{ GRPCStatus() *status.Status }); ok {
		return err
	}
	if ves := validationErrors(err); len(ves) > 0 {
		s.metrics.validation.WithLabelValues(string(validate.ReasonOf(err))).Inc()
		return invalidArgument(ves, sc)
	}
	switch {
	case errors.Is(err, context.Canceled):
		return status.Error(codes.Canceled, "request canceled")
	case errors.Is(err, context.DeadlineExceeded):
		return status.Error(codes.DeadlineExceeded, "deadline exceeded before the analysis finished")
	}
	id := requestIDFrom(ctx)
	s.log.LogAttrs(ctx, slog.LevelError, "internal error", slog.String("request_id", id), slog.String("error", err.Error()))
	return status.Errorf(codes.Internal, "internal error (request id %s)", id)
}

// validationErrors returns the *validate.Error values in err's tree, in
// order (errors.Join and wrapping are followed).
func validationErrors(err error) []*validate.Error {
	return validate.Errors(err, maxViolations)
}

// maxViolations bounds the field violations put in one status, so that a
// capture with a million bad samples does not produce a giant error.
const maxViolations = 100

// invalidArgument builds an INVALID_ARGUMENT status whose message is the
// first error and whose BadRequest detail lists every violation.
func invalidArgument(ves []*validate.Error, sc scope) error {
	br := &errdetails.BadRequest{}
	for _, ve := range ves {
		br.FieldViolations = append(br.FieldViolations, &errdetails.BadRequest_FieldViolation{
			Field:       sc.path(fieldPath(ve)),
			Description: ve.Error(),
			Reason:      reasonCode(string(ve.Reason)),
		})
	}
	msg := ves[0].Error()
	if l := sc.label(); l != "" {
		msg = l + ": " + msg
	}
	if len(ves) > 1 {
		msg = fmt.Sprintf("%s (and %d more)", msg, len(ves)-1)
	}
	return withDetails(codes.InvalidArgument, msg, br)
}

// fieldPath is the violation's field path: the field, then [sample] when a
// sample is named, e.g. tracks[2].time_s[118].
func fieldPath(ve *validate.Error) string {
	if ve.Sample >= 0 && ve.Field != "" {
		return fmt.Sprintf("%s[%d]", ve.Field, ve.Sample)
	}
	return ve.Field
}

func withPrefix(prefix, field string) string {
	switch {
	case prefix == "":
		return field
	case field == "":
		return prefix
	case field == prefix || strings.HasPrefix(field, prefix+".") || strings.HasPrefix(field, prefix+"["):
		return field
	}
	return prefix + "." + field
}

// reasonCode turns a validation reason into the UPPER_SNAKE_CASE form
// AIP-193 asks of error reasons.
func reasonCode(r string) string {
	b := []byte(strings.ToUpper(r))
	for i, c := range b {
		if !(c >= 'A' && c <= 'Z' || c >= '0' && c <= '9') {
			b[i] = '_'
		}
	}
	return string(b)
}

// fieldViolation is an INVALID_ARGUMENT status naming one field, for
// protocol mistakes found by the server itself.
func fieldViolation(field, reason, format string, a ...any) error {
	desc := fmt.Sprintf(format, a...)
	return withDetails(codes.InvalidArgument, field+": "+desc, &errdetails.BadRequest{
		FieldViolations: []*errdetails.BadRequest_FieldViolation{{Field: field, Description: desc, Reason: reason}},
	})
}

// resourceExhausted is a RESOURCE_EXHAUSTED status with a retry hint.
func resourceExhausted(retry time.Duration, format string, a ...any) error {
	return withDetails(codes.ResourceExhausted, fmt.Sprintf(format, a...), &errdetails.RetryInfo{RetryDelay: durationpb.New(retry)})
}

// withDetails builds a status error with one detail message.
func withDetails(c codes.Code, msg string, detail protoadapt.MessageV1) error {
	st := status.New(c, msg)
	if d, err := st.WithDetails(detail); err == nil {
		st = d
	}
	return st.Err()
}
