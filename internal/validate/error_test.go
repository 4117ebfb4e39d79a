package validate

import (
	"errors"
	"fmt"
	"testing"
)

// TestErrorsWalksTree: joined and wrapped validation errors are all found,
// in order, up to the bound; other errors are skipped.
func TestErrorsWalksTree(t *testing.T) {
	a := &Error{Field: "a", Sample: -1, Reason: ReasonMalformed}
	b := &Error{Field: "b", Sample: 2, Reason: ReasonNonFinite}
	c := &Error{Field: "c", Sample: -1, Reason: ReasonTimeOrder}
	err := errors.Join(fmt.Errorf("wrapped: %w", a), errors.New("plain"), errors.Join(b, c))
	got := Errors(err, 0)
	if len(got) != 3 || got[0] != a || got[1] != b || got[2] != c {
		t.Fatalf("Errors = %v, want a, b, c", got)
	}
	if got := Errors(err, 2); len(got) != 2 || got[1] != b {
		t.Fatalf("Errors(max 2) = %v", got)
	}
	if got := Errors(errors.New("plain"), 0); len(got) != 0 {
		t.Fatalf("Errors(plain) = %v", got)
	}
}
