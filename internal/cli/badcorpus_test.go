package cli

import (
	"bufio"
	"bytes"
	"fmt"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
)

// TestAnalyzeBadCorpus runs `kinchain analyze FILE` on every capture file
// of testdata/bad (see its README.md; the expectations are in cases.tsv)
// that fails under the default limits: the command must exit 1 with one
// error line naming the file and the field (with the sample, or the line
// when the field is unknown), and never panic. Files whose case lowers a
// limit (the CLI has no flags for limits) and whole requests (the CLI
// reads captures) are left to the decode and server corpus tests.
func TestAnalyzeBadCorpus(t *testing.T) {
	dir := filepath.Join("..", "..", "testdata", "bad")
	f, err := os.Open(filepath.Join(dir, "cases.tsv"))
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	ran := 0
	sc := bufio.NewScanner(f)
	for sc.Scan() {
		l := sc.Text()
		if l == "" || l[0] == '#' {
			continue
		}
		c := strings.Split(l, "\t")
		if len(c) != 7 {
			t.Fatalf("cases.tsv: %q", l)
		}
		file, decoder, limits, field := c[0], c[1], c[2], c[4]
		line, _ := strconv.Atoi(c[5])
		sample, _ := strconv.Atoi(c[6])
		if decoder != "file" || limits != "-" {
			continue
		}
		ran++
		t.Run(file, func(t *testing.T) {
			var stdout, stderr bytes.Buffer
			path := filepath.Join(dir, file)
			code := Main([]string{"analyze", path}, strings.NewReader(""), &stdout, &stderr)
			msg := stderr.String()
			if code != 1 {
				t.Fatalf("exit code %d, want 1; stderr:\n%s", code, msg)
			}
			if stdout.Len() != 0 {
				t.Errorf("a report was printed for a bad file:\n%s", stdout.String())
			}
			if strings.Count(strings.TrimSpace(msg), "\n") != 0 || strings.Contains(msg, "panic") || strings.Contains(msg, "goroutine") {
				t.Errorf("stderr is not one error line:\n%s", msg)
			}
			if !strings.Contains(msg, path) {
				t.Errorf("stderr does not name the file %s: %s", path, msg)
			}
			want := ""
			switch {
			case field != "-" && sample >= 0:
				want = fmt.Sprintf("%s[%d]", field, sample)
			case field != "-":
				want = field
			case line > 0:
				want = fmt.Sprintf("line %d", line)
			}
			if want != "" && !strings.Contains(msg, want) {
				t.Errorf("stderr does not name %q: %s", want, msg)
			}
			if field != "-" && line > 0 && !strings.Contains(msg, fmt.Sprintf("line %d", line)) {
				t.Errorf("stderr does not name line %d: %s", line, msg)
			}
		})
	}
	if err := sc.Err(); err != nil {
		t.Fatal(err)
	}
	if ran < 40 {
		t.Errorf("only %d corpus files ran", ran)
	}
	// The good capture still analyses (the command is not broken).
	var stdout, stderr bytes.Buffer
	if code := Main([]string{"analyze", filepath.Join("..", "..", "testdata", "good", "capture.csv")}, strings.NewReader(""), &stdout, &stderr); code != 0 {
		t.Errorf("good capture: exit %d: %s", code, stderr.String())
	}
}
