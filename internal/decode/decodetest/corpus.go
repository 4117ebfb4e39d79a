// Package decodetest gives tests across the repository the bad-input
// corpus of testdata/bad: its directory and the expectations of its
// manifest cases.tsv (see testdata/bad/README.md).
package decodetest

import (
	"bufio"
	"os"
	"path/filepath"
	"runtime"
	"strconv"
	"strings"
	"testing"

	"github.com/kinchain/kinchain/internal/validate"
)

// Case is one line of cases.tsv.
type Case struct {
	// File is the corpus file name; Decoder the format it is read as.
	File, Decoder string
	// Limits is the manifest's limits column as written ("-" for none);
	// Lim the same, parsed (zero fields: the defaults).
	Limits string
	Lim    validate.Limits
	// Reason, Field, Line and Sample are the expected error's.
	Reason       validate.Reason
	Field        string
	Line, Sample int
}

// Dir returns the corpus directory, testdata/bad of the repository.
func Dir() string {
	_, file, _, _ := runtime.Caller(0)
	// internal/decode/decodetest/<file> → repository root
	return filepath.Join(filepath.Dir(file), "..", "..", "..", "testdata", "bad")
}

// Cases reads cases.tsv, failing the test on any malformed line.
func Cases(t testing.TB) []Case {
	t.Helper()
	f, err := os.Open(filepath.Join(Dir(), "cases.tsv"))
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	var out []Case
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
		bc := Case{File: c[0], Decoder: c[1], Limits: c[2], Reason: validate.Reason(c[3]), Field: c[4]}
		if bc.Field == "-" {
			bc.Field = ""
		}
		if bc.Line, err = strconv.Atoi(c[5]); err != nil {
			t.Fatalf("cases.tsv:%d: line %q", n, c[5])
		}
		if bc.Sample, err = strconv.Atoi(c[6]); err != nil {
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
					bc.Lim.MaxSamples = x
				case "max_tracks":
					bc.Lim.MaxTracks = x
				case "max_bytes":
					bc.Lim.MaxBytes = x
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
