package decode_test

import (
	"errors"
	"os"
	"path/filepath"
	"slices"
	"testing"

	"google.golang.org/protobuf/proto"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/decode"
	"github.com/kinchain/kinchain/internal/decode/decodetest"
	"github.com/kinchain/kinchain/internal/validate"
)

type badCase struct {
	file, decoder string
	lim           validate.Limits
	reason        validate.Reason
	field         string
	line, sample  int
}

func readCases(t testing.TB) []badCase {
	var out []badCase
	for _, c := range decodetest.Cases(t) {
		out = append(out, badCase{file: c.File, decoder: c.Decoder, lim: c.Lim, reason: c.Reason, field: c.Field, line: c.Line, sample: c.Sample})
	}
	return out
}

// decodeAndValidate runs a corpus file through the pipeline's first two
// stages as the CLI and the server do.
func decodeAndValidate(name string, b []byte, decoder string, lim validate.Limits) error {
	switch decoder {
	case "request":
		r, err := decode.JSONRequest(b)
		if err != nil {
			return err
		}
		_, err = validate.Request(r, lim, nil)
		return err
	default:
		pc, loc, err := decode.File(name, b, lim)
		if err != nil {
			return err
		}
		_, err = validate.Capture(pc, lim, loc)
		return err
	}
}

// TestBadCorpus runs every file of testdata/bad through decode and validate
// and checks the reason, field, line and sample listed in cases.tsv.
func TestBadCorpus(t *testing.T) {
	cases := readCases(t)
	listed := map[string]bool{}
	for _, tc := range cases {
		if listed[tc.file] {
			t.Errorf("%s listed twice", tc.file)
		}
		listed[tc.file] = true
		t.Run(tc.file, func(t *testing.T) {
			b, err := os.ReadFile(filepath.Join(badDir, tc.file))
			if err != nil {
				t.Fatal(err)
			}
			err = decodeAndValidate(tc.file, b, tc.decoder, tc.lim)
			var e *validate.Error
			if !errors.As(err, &e) {
				t.Fatalf("got %v, want a *validate.Error", err)
			}
			if e.Reason != tc.reason || e.Field != tc.field || e.Line != tc.line || e.Sample != tc.sample {
				t.Errorf("got reason %s field %q line %d sample %d\n  (%v)\nwant %s %q %d %d", e.Reason, e.Field, e.Line, e.Sample, err, tc.reason, tc.field, tc.line, tc.sample)
			}
			if e.Detail == "" {
				t.Error("no detail")
			}
		})
	}
	entries, err := os.ReadDir(badDir)
	if err != nil {
		t.Fatal(err)
	}
	files := 0
	for _, e := range entries {
		switch n := e.Name(); n {
		case "README.md", "cases.tsv":
		default:
			files++
			if !listed[n] {
				t.Errorf("%s is not in cases.tsv", n)
			}
		}
	}
	if files != len(cases) {
		t.Errorf("%d files, %d cases", files, len(cases))
	}
	// Every format and many reasons are covered.
	reasons := map[validate.Reason]bool{}
	for _, c := range cases {
		reasons[c.reason] = true
	}
	for _, r := range validate.AllReasons() {
		if !reasons[r] && !slices.Contains([]validate.Reason{validate.ReasonOther}, r) {
			t.Errorf("no corpus file for reason %s", r)
		}
	}
}

// TestGoodFiles decodes the same capture from CSV, protojson and binary
// protobuf; all three equal the capture written out by formula, and it
// passes validation.
func TestGoodFiles(t *testing.T) {
	want := goodCapture()
	for _, name := range []string{"capture.csv", "capture.json", "capture.pb"} {
		b, err := os.ReadFile(filepath.Join(goodDir, name))
		if err != nil {
			t.Fatal(err)
		}
		got, loc, err := decode.File(name, b, validate.Limits{})
		if err != nil {
			t.Fatalf("%s: %v", name, err)
		}
		if !proto.Equal(got, want) {
			t.Errorf("%s differs:\n%s", name, diff(want, got))
		}
		c, err := validate.Capture(got, validate.Limits{}, loc)
		if err != nil {
			t.Fatalf("%s: %v", name, err)
		}
		if len(c.Tracks) != 2 || c.Tracks[1].Segment != kinchainv1.Segment_SEGMENT_CLUB || c.Tracks[0].Renormalized != 0 {
			t.Errorf("%s: validated shape wrong", name)
		}
	}
}
