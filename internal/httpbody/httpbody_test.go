package httpbody

import (
	"io"
	"net/http/httptest"
	"strings"
	"testing"
)

func TestClassify(t *testing.T) {
	cases := []struct {
		ct, body string
		want     Kind
	}{
		{"text/csv", "{not json really", CSV},
		{"application/csv; charset=utf-8", "time_s,segment", CSV},
		{"application/json", "time_s", JSON},
		{"application/problem+json", "{}", JSON},
		{"", "  \n{\"capture\":{}}", JSON},
		{"", "# club: 7-iron\ntime_s,segment,qw,qx,qy,qz\n", CSV},
		{"application/octet-stream", "time_s,segment", CSV},
		{"text/plain", "{}", JSON},
		{"image/png", "x", Unsupported},
		{"not a media type;;", "x", Unsupported},
	}
	for _, c := range cases {
		r := httptest.NewRequest("POST", "/v1/captures:analyze", strings.NewReader(c.body))
		if c.ct != "" {
			r.Header.Set("Content-Type", c.ct)
		}
		got, r2 := Classify(r)
		if got != c.want {
			t.Errorf("%q %q: kind %d, want %d", c.ct, c.body, got, c.want)
		}
		// Sniffing must not eat the body.
		b, err := io.ReadAll(r2.Body)
		if err != nil || string(b) != c.body {
			t.Errorf("%q: body after Classify %q (%v), want %q", c.ct, b, err, c.body)
		}
	}
}
