package decode_test

import (
	"bufio"
	"errors"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"testing"

	"google.golang.org/protobuf/proto"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/decode"
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
	f, err := os.Open(filepath.Join(badDir, "cases.tsv"))
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	var out []badCase
	sc := bufio.NewScanner(f)
	for n := 1; sc.Scan(); n++ {
		l := sc.Text()
		if l == "" || l[0] == '#' {
			continue
		}
		c := strings.Split(l, "\t")
		if len(c) != 7 {
			t.Fatalf("cases.tsv:%d: %d columns", n, len(c))
		}
		bc := badCase{file: c[0], decoder: c[1], reason: validate.Reason(c[3]), field: c[4]}
		if bc.field == "-" {
			bc.field = ""
		}
		if bc.line, err = strconv.Atoi(c[5]); err != nil {
			t.Fatalf("cases.tsv:%d: line %q", n, c[5])
		}
		if bc.sample, err = strconv.Atoi(c[6]); err != nil {
			t.Fatalf("cases.tsv:%d: sample %q", n, c[6])
		}
		if c[2] != "-" {
			for _, kv := range strings.Split(c[2], ",") {
				k, v, _ := strings.Cut(kv, "=")
				x, err := strconv.Atoi(v)
				if err != nil {
					t.Fatalf("cases.tsv:%d: limit %q", n, kv)
				}
				switch k {
				case "max_samples":
					bc.lim.MaxSamples = x
				case "max_tracks":
					bc.lim.MaxTracks = x
				case "max_bytes":
					bc.lim.MaxBytes = x
				default:
					t.Fatalf("cases.tsv:%d: unknown limit %q", n, k)
				}
			}
		}
		out = append(out, bc)
	}
	if err := sc.Err(); err != nil {
		t.Fatal(err)
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
