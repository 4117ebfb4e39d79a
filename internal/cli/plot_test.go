package cli

import (
	"bytes"
	"context"
	"encoding/xml"
	"image/png"
	"io"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// wellFormedSVG fails the test unless b is well-formed XML (encoding/xml)
// with an <svg> root, and returns the text of its <text> elements.
func wellFormedSVG(t *testing.T, b []byte) []string {
	t.Helper()
	dec := xml.NewDecoder(bytes.NewReader(b))
	var texts []string
	root, inText := "", false
	for {
		tok, err := dec.Token()
		if err == io.EOF {
			break
		}
		if err != nil {
			t.Fatalf("not well-formed XML: %v", err)
		}
		switch el := tok.(type) {
		case xml.StartElement:
			if root == "" {
				root = el.Name.Local
			}
			inText = el.Name.Local == "text"
			if inText {
				texts = append(texts, "")
			}
		case xml.CharData:
			if inText {
				texts[len(texts)-1] += string(el)
			}
		case xml.EndElement:
			inText = false
		}
	}
	if root != "svg" {
		t.Fatalf("root element %q, want svg", root)
	}
	return texts
}

func runPlot(t *testing.T, stdin io.Reader, args ...string) ([]byte, string, error) {
	t.Helper()
	var out, errb bytes.Buffer
	if stdin == nil {
		stdin = strings.NewReader("")
	}
	err := RunPlot(context.Background(), args, stdin, &out, &errb)
	return out.Bytes(), errb.String(), err
}

func TestPlotDemoSVG(t *testing.T) {
	b, stderr, err := runPlot(t, nil, "--demo")
	if err != nil {
		t.Fatalf("%v\n%s", err, stderr)
	}
	texts := wellFormedSVG(t, b)
	for _, want := range []string{"time from impact (ms)", "angular speed (deg/s)", "time from top (ms)", "Posture (deg)", "impact"} {
		found := false
		for _, s := range texts {
			found = found || s == want
		}
		if !found {
			t.Errorf("no text %q in the SVG", want)
		}
	}
}

// TestPlotFile reads a capture file, as analyze does, and writes a PNG
// whose format follows from --out.
func TestPlotFile(t *testing.T) {
	dir := t.TempDir()
	capture := filepath.Join(dir, "golfer.csv")
	var errb bytes.Buffer
	if err := RunSynth(context.Background(), []string{"--out", capture}, io.Discard, &errb); err != nil {
		t.Fatalf("synth: %v\n%s", err, errb.String())
	}
	out := filepath.Join(dir, "swing.png")
	if _, stderr, err := runPlot(t, nil, capture, "--out", out, "--width", "1000", "--speed", "vertical"); err != nil {
		t.Fatalf("%v\n%s", err, stderr)
	}
	f, err := os.Open(out)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	img, err := png.Decode(f)
	if err != nil {
		t.Fatalf("--out swing.png is not a PNG: %v", err)
	}
	if s := img.Bounds().Size(); s.X != 1000 || s.Y != 1250 {
		t.Errorf("size %v, want 1000×1250", s)
	}
	// The same capture on standard input, SVG, with the vertical speed
	// definition reflected in the axis label.
	data, err := os.ReadFile(capture)
	if err != nil {
		t.Fatal(err)
	}
	b, stderr, err := runPlot(t, bytes.NewReader(data), "-", "--speed", "vertical", "--format", "svg", "--segments", "pelvis,club")
	if err != nil {
		t.Fatalf("%v\n%s", err, stderr)
	}
	texts := "\n" + strings.Join(wellFormedSVG(t, b), "\n") + "\n"
	if !strings.Contains(texts, "\nturn rate about vertical (deg/s)\n") {
		t.Error("--speed vertical not reflected in the y-axis label")
	}
	// The key and the transition rows name the drawn segments only.
	if strings.Contains(texts, "\nlead upper arm\n") || !strings.Contains(texts, "\nclub\n") {
		t.Error("--segments pelvis,club: wrong segments drawn")
	}
	// No leftover temporary files next to the output.
	entries, _ := os.ReadDir(dir)
	if len(entries) != 2 {
		t.Errorf("files in the output directory: %v", entries)
	}
}

func TestPlotPNGToStdout(t *testing.T) {
	b, stderr, err := runPlot(t, nil, "--demo", "--format", "png", "--from-ms", "-400", "--to-ms", "100")
	if err != nil {
		t.Fatalf("%v\n%s", err, stderr)
	}
	if _, err := png.Decode(bytes.NewReader(b)); err != nil {
		t.Fatalf("not a PNG: %v", err)
	}
}

func TestPlotUsageErrors(t *testing.T) {
	cases := []struct {
		args []string
		want string
	}{
		{[]string{"--demo", "--swing", "7"}, "--swing"},
		{[]string{"--demo", "--swing", "-1"}, "--swing"},
		{[]string{"--demo", "--format", "gif"}, "--format"},
		{[]string{"--demo", "--from-ms", "-100"}, "--from-ms"},
		{[]string{"--demo", "--from-ms", "100", "--to-ms", "-100"}, "--from-ms"},
		{[]string{"--demo", "--segments", "pelvis,tail"}, "--segments"},
		{[]string{"--demo", "--width", "100"}, "--width"},
		{[]string{"--demo", "--speed", "sideways"}, "--speed"},
		{[]string{}, "no capture"},
	}
	for _, c := range cases {
		_, _, err := runPlot(t, nil, c.args...)
		if err == nil || !isUsage(err) || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%q: err = %v, want a usage error naming %s", c.args, err, c.want)
		}
	}
	// A file that does not exist is an error, not a usage error.
	if _, _, err := runPlot(t, nil, filepath.Join(t.TempDir(), "missing.csv")); err == nil || isUsage(err) {
		t.Errorf("missing file: err = %v", err)
	}
}
