package decode

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math"
	"regexp"
	"strconv"
	"strings"

	"google.golang.org/protobuf/encoding/protojson"
	"google.golang.org/protobuf/proto"
	"google.golang.org/protobuf/reflect/protoreflect"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/validate"
)

// Full names of the fields the size limits count.
const (
	fieldTracks = "kinchain.v1.Capture.tracks"
	fieldTime   = "kinchain.v1.Track.time_s"
)

// JSON decodes a capture in protojson form (field names in either the proto
// form, time_s, or the JSON form, timeS; enums by name or number; doubles
// as numbers or the strings "NaN", "Infinity", "-Infinity"). It enforces the
// default limits on bytes, tracks and samples. Errors are *validate.Error
// with ReasonMalformed (or ReasonTooLarge) naming the field path, sample and
// line where the input goes wrong.
func JSON(b []byte) (*kinchainv1.Capture, error) {
	return jsonCapture(b, validate.Limits{})
}

// JSONRequest decodes an AnalyzeCaptureRequest in protojson form
// ({"capture": {...}, "options": {...}}); see JSON. Field paths start at the
// request ("capture.tracks[0].qw").
func JSONRequest(b []byte) (*kinchainv1.AnalyzeCaptureRequest, error) {
	r := &kinchainv1.AnalyzeCaptureRequest{}
	if err := unmarshalJSON(b, r, validate.Limits{}); err != nil {
		return nil, err
	}
	return r, nil
}

func jsonCapture(b []byte, lim validate.Limits) (*kinchainv1.Capture, error) {
	c := &kinchainv1.Capture{}
	if err := unmarshalJSON(b, c, lim); err != nil {
		return nil, err
	}
	return c, nil
}

// unmarshalJSON decodes b into m with protojson. Before that, when b holds
// more objects than a capture within the limits can, it walks the JSON to
// count tracks and samples, so that a small body of many empty tracks cannot
// make protojson allocate without bound. When protojson fails, the walk
// finds the field path of the failure.
func unmarshalJSON(b []byte, m proto.Message, lim validate.Limits) error {
	lim = lim.WithDefaults()
	if len(b) > lim.MaxBytes {
		return &validate.Error{Sample: -1, Reason: validate.ReasonTooLarge, Detail: fmt.Sprintf("%d bytes, more than the limit of %d", len(b), lim.MaxBytes)}
	}
	md := m.ProtoReflect().Descriptor()
	walked := false
	if bytes.Count(b, []byte("{")) > 4*lim.MaxTracks+16 {
		walked = true
		if err := walkJSON(b, md, lim); err != nil {
			return err
		}
	}
	if err := protojson.Unmarshal(b, m); err != nil {
		if !walked {
			if werr := walkJSON(b, md, lim); werr != nil {
				return werr
			}
		}
		return protojsonError(err)
	}
	return nil
}

var protoLine = regexp.MustCompile(`\(line (\d+):(\d+)\)`)

// protojsonError turns a protojson error the walk could not place into a
// *validate.Error, keeping its line.
func protojsonError(err error) error {
	s := err.Error()
	if rest, ok := strings.CutPrefix(s, "proto:"); ok {
		s = strings.TrimLeft(rest, " \u00a0")
	}
	e := &validate.Error{Sample: -1, Reason: validate.ReasonMalformed, Detail: s}
	if m := protoLine.FindStringSubmatch(s); m != nil {
		e.Line, _ = strconv.Atoi(m[1])
	}
	return e
}

// walkJSON checks b against the message md the way protojson reads it and
// returns the first problem as a *validate.Error with the field path, the
// sample and the line, or nil.
func walkJSON(b []byte, md protoreflect.MessageDescriptor, lim validate.Limits) *validate.Error {
	w := &jsonWalker{dec: json.NewDecoder(bytes.NewReader(b)), b: b, lim: lim}
	w.dec.UseNumber()
	tok, err := w.dec.Token()
	if err != nil {
		return w.syntax(err, "")
	}
	if tok != json.Delim('{') {
		return w.fault("", -1, "expected a JSON object, got %s", describe(tok))
	}
	if e := w.object(md, ""); e != nil {
		return e
	}
	if _, err := w.dec.Token(); err != io.EOF {
		return w.fault("", -1, "data after the end of the top-level object")
	}
	return nil
}

type jsonWalker struct {
	dec             *json.Decoder
	b               []byte
	lim             validate.Limits
	tracks, samples int
}

// line returns the line of the last token read.
func (w *jsonWalker) line() int {
	off := int(w.dec.InputOffset())
	off = min(max(off, 0), len(w.b))
	return 1 + bytes.Count(w.b[:off], []byte("\n"))
}

func (w *jsonWalker) fault(path string, sample int, format string, a ...any) *validate.Error {
	return &validate.Error{Field: path, Sample: sample, Line: w.line(), Reason: validate.ReasonMalformed, Detail: fmt.Sprintf(format, a...)}
}

func (w *jsonWalker) syntax(err error, path string) *validate.Error {
	e := &validate.Error{Field: path, Sample: -1, Reason: validate.ReasonMalformed}
	var se *json.SyntaxError
	switch {
	case errors.As(err, &se):
		off := min(max(int(se.Offset), 0), len(w.b))
		e.Line = 1 + bytes.Count(w.b[:off], []byte("\n"))
		e.Detail = "JSON syntax: " + se.Error()
	case err == io.EOF || errors.Is(err, io.ErrUnexpectedEOF):
		e.Line = 1 + bytes.Count(w.b, []byte("\n"))
		e.Detail = "the JSON ends early (truncated?)"
	default:
		e.Line = w.line()
		e.Detail = "JSON: " + err.Error()
	}
	return e
}

func join(path, name string) string {
	if path == "" {
		return name
	}
	return path + "." + name
}

// object walks the members of an object whose '{' has been read.
func (w *jsonWalker) object(md protoreflect.MessageDescriptor, path string) *validate.Error {
	seen := map[protoreflect.FieldNumber]bool{}
	fields := md.Fields()
	for {
		tok, err := w.dec.Token()
		if err != nil {
			return w.syntax(err, path)
		}
		if tok == json.Delim('}') {
			return nil
		}
		key, _ := tok.(string)
		fd := fields.ByJSONName(key)
		if fd == nil {
			fd = fields.ByTextName(key)
		}
		if fd == nil {
			d := "unknown field"
			if md.FullName() == "kinchain.v1.Capture" && (key == "capture" || key == "options") {
				d += " (this looks like an AnalyzeCaptureRequest, not a Capture)"
			}
			return w.fault(join(path, key), -1, "%s", d)
		}
		fp := join(path, string(fd.Name()))
		if seen[fd.Number()] {
			return w.fault(fp, -1, "field given twice")
		}
		seen[fd.Number()] = true
		if e := w.value(fd, fp); e != nil {
			return e
		}
	}
}

func (w *jsonWalker) value(fd protoreflect.FieldDescriptor, fp string) *validate.Error {
	tok, err := w.dec.Token()
	if err != nil {
		return w.syntax(err, fp)
	}
	if tok == nil {
		return nil // null: the field is unset
	}
	switch {
	case fd.IsMap():
		if tok != json.Delim('{') {
			return w.fault(fp, -1, "expected an object, got %s", describe(tok))
		}
		for {
			k, err := w.dec.Token()
			if err != nil {
				return w.syntax(err, fp)
			}
			if k == json.Delim('}') {
				return nil
			}
			v, err := w.dec.Token()
			if err != nil {
				return w.syntax(err, fp)
			}
			if e := w.scalar(fd.MapValue(), fmt.Sprintf("%s[%q]", fp, k), -1, v); e != nil {
				return e
			}
		}
	case fd.IsList():
		if tok != json.Delim('[') {
			return w.fault(fp, -1, "expected an array, got %s", describe(tok))
		}
		for i := 0; ; i++ {
			v, err := w.dec.Token()
			if err != nil {
				return w.syntax(err, fp)
			}
			if v == json.Delim(']') {
				return nil
			}
			switch fd.FullName() {
			case fieldTracks:
				if w.tracks++; w.tracks > w.lim.MaxTracks {
					return &validate.Error{Field: fp, Sample: -1, Line: w.line(), Reason: validate.ReasonTooLarge, Detail: fmt.Sprintf("more than the limit of %d tracks", w.lim.MaxTracks)}
				}
			case fieldTime:
				if w.samples++; w.samples > w.lim.MaxSamples {
					return &validate.Error{Field: fp, Sample: i, Line: w.line(), Reason: validate.ReasonTooLarge, Detail: fmt.Sprintf("more than the limit of %d samples", w.lim.MaxSamples)}
				}
			}
			if v == nil {
				return w.fault(fp, i, "null in an array")
			}
			var e *validate.Error
			if fd.Kind() == protoreflect.MessageKind {
				e = w.scalar(fd, fmt.Sprintf("%s[%d]", fp, i), -1, v)
			} else {
				e = w.scalar(fd, fp, i, v)
			}
			if e != nil {
				return e
			}
		}
	}
	return w.scalar(fd, fp, -1, tok)
}

// scalar checks one value (a message, or a singular or list element).
func (w *jsonWalker) scalar(fd protoreflect.FieldDescriptor, fp string, i int, tok json.Token) *validate.Error {
	bad := func(want string) *validate.Error {
		return w.fault(fp, i, "expected %s, got %s", want, describe(tok))
	}
	switch fd.Kind() {
	case protoreflect.MessageKind, protoreflect.GroupKind:
		if tok != json.Delim('{') {
			return bad("an object")
		}
		return w.object(fd.Message(), fp)
	case protoreflect.DoubleKind, protoreflect.FloatKind:
		switch v := tok.(type) {
		case json.Number:
			if f, err := strconv.ParseFloat(string(v), 64); err != nil || (fd.Kind() == protoreflect.FloatKind && math.Abs(f) > math.MaxFloat32) {
				return w.fault(fp, i, "%s is out of range", v)
			}
			return nil
		case string:
			switch v {
			case "NaN", "Infinity", "-Infinity":
				return nil
			}
			if _, err := strconv.ParseFloat(v, 64); err == nil && strings.TrimSpace(v) == v {
				return nil
			}
		}
		return bad(`a number (or "NaN", "Infinity", "-Infinity")`)
	case protoreflect.BoolKind:
		if _, ok := tok.(bool); ok {
			return nil
		}
		return bad("true or false")
	case protoreflect.StringKind:
		if _, ok := tok.(string); ok {
			return nil
		}
		return bad("a string")
	case protoreflect.BytesKind:
		if _, ok := tok.(string); ok {
			return nil
		}
		return bad("a base64 string")
	case protoreflect.EnumKind:
		vals := fd.Enum().Values()
		switch v := tok.(type) {
		case string:
			if vals.ByName(protoreflect.Name(v)) != nil {
				return nil
			}
			return w.fault(fp, i, "unknown %s value %q", fd.Enum().Name(), v)
		case json.Number:
			if _, err := strconv.ParseInt(string(v), 10, 32); err == nil {
				return nil
			}
		}
		return bad("an enum name or an integer")
	default: // integers
		bitsz := 64
		switch fd.Kind() {
		case protoreflect.Int32Kind, protoreflect.Sint32Kind, protoreflect.Sfixed32Kind, protoreflect.Uint32Kind, protoreflect.Fixed32Kind:
			bitsz = 32
		}
		var s string
		switch v := tok.(type) {
		case json.Number:
			s = string(v)
		case string:
			s = v
		default:
			return bad("an integer")
		}
		var err error
		switch fd.Kind() {
		case protoreflect.Uint32Kind, protoreflect.Fixed32Kind, protoreflect.Uint64Kind, protoreflect.Fixed64Kind:
			_, err = strconv.ParseUint(s, 10, bitsz)
		default:
			_, err = strconv.ParseInt(s, 10, bitsz)
		}
		if err != nil {
			return bad(fmt.Sprintf("an integer of %d bits", bitsz))
		}
		return nil
	}
}

// describe names a JSON token for messages.
func describe(tok json.Token) string {
	switch v := tok.(type) {
	case json.Delim:
		switch v {
		case '{':
			return "an object"
		case '[':
			return "an array"
		}
		return string(v)
	case string:
		if len(v) > 40 {
			v = v[:40] + "…"
		}
		return fmt.Sprintf("the string %q", v)
	case json.Number:
		return "the number " + string(v)
	case bool:
		return strconv.FormatBool(v)
	case nil:
		return "null"
	}
	return fmt.Sprint(tok)
}
