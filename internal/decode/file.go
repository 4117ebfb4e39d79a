package decode

import (
	"bytes"
	"fmt"
	"path/filepath"
	"strings"
	"unicode/utf8"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/validate"
)

// Format is an encoding of a capture.
type Format int

// The formats File reads.
const (
	FormatUnknown Format = iota
	FormatCSV
	FormatJSON
	FormatProto
)

// String returns "csv", "json", "protobuf" or "unknown".
func (f Format) String() string {
	switch f {
	case FormatCSV:
		return "csv"
	case FormatJSON:
		return "json"
	case FormatProto:
		return "protobuf"
	}
	return "unknown"
}

// sniffBytes is how much of the input Detect looks at.
const sniffBytes = 512

// Detect picks the format of a capture file: by the extension of name
// (.csv; .json; .pb, .bin, .binpb; case ignored), otherwise by content: text
// (valid UTF-8 without control characters other than tab, CR and LF in the
// first 512 bytes) whose first non-blank character is '{' is JSON, other text
// is CSV, anything else binary protobuf. A binary capture with samples
// does not pass as text: the tags of a track's segment and arrays (0x08,
// 0x12, ...) are control bytes. Give binary files an extension all the same.
func Detect(name string, b []byte) Format {
	switch strings.ToLower(filepath.Ext(name)) {
	case ".csv":
		return FormatCSV
	case ".json":
		return FormatJSON
	case ".pb", ".bin", ".binpb":
		return FormatProto
	}
	head := b[:min(len(b), sniffBytes)]
	if !isText(head, len(b) > sniffBytes) {
		return FormatProto
	}
	t := bytes.TrimLeft(bytes.TrimPrefix(head, []byte("\xef\xbb\xbf")), " \t\r\n")
	if len(t) > 0 && t[0] == '{' {
		return FormatJSON
	}
	return FormatCSV
}

// isText reports whether b looks like text. cut says b is a prefix, so an
// incomplete UTF-8 sequence at its end is allowed.
func isText(b []byte, cut bool) bool {
	for len(b) > 0 {
		r, n := utf8.DecodeRune(b)
		if r == utf8.RuneError && n <= 1 {
			return cut && len(b) < utf8.UTFMax && !utf8.FullRune(b)
		}
		if r < 0x20 && r != '\t' && r != '\r' && r != '\n' || r == 0x7f {
			return false
		}
		b = b[n:]
	}
	return true
}

// File decodes the capture file name (only its extension is used) with
// contents b, in the format Detect picks, under the limits lim (zero fields:
// defaults). The Locator maps samples to file lines for CSV and is nil for
// the other formats. An empty file is an error.
func File(name string, b []byte, lim validate.Limits) (*kinchainv1.Capture, validate.Locator, error) {
	return FileWith(name, b, lim, nil)
}

// FileWith is File with the sample arrays of a protobuf capture taken from
// f (nil: allocated); the other formats ignore f.
func FileWith(name string, b []byte, lim validate.Limits, f Floats) (*kinchainv1.Capture, validate.Locator, error) {
	lim = lim.WithDefaults()
	if len(b) > lim.MaxBytes {
		return nil, nil, &validate.Error{Sample: -1, Reason: validate.ReasonTooLarge, Detail: fmt.Sprintf("%d bytes, more than the limit of %d", len(b), lim.MaxBytes)}
	}
	if len(b) == 0 {
		return nil, nil, &validate.Error{Sample: -1, Reason: validate.ReasonEmpty, Detail: "the file is empty"}
	}
	switch Detect(name, b) {
	case FormatCSV:
		c, loc, err := CSV(bytes.NewReader(b), lim)
		if err != nil {
			return nil, nil, err
		}
		return c, loc, nil
	case FormatJSON:
		c, err := jsonCapture(b, lim)
		return c, nil, err
	default:
		c, err := protoCapture(b, lim, f)
		return c, nil, err
	}
}
