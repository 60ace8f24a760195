package store

import (
	"fmt"
	"strings"
	"testing"
)

// TestValidationErrorMessage: the message lists every error of a short
// list and the first errorListLimit of a long one with a count of the
// rest, while Fields keeps them all.
func TestValidationErrorMessage(t *testing.T) {
	for _, tc := range []struct {
		n         int
		listed    int
		wantTrail string
	}{
		{1, 1, ""},
		{errorListLimit, errorListLimit, ""},
		{errorListLimit + 1, errorListLimit, "; and 1 more"},
		{72000, errorListLimit, "; and 71980 more"},
	} {
		e := &ValidationError{}
		for i := range tc.n {
			e.Fields = append(e.Fields, FieldError{Row: i + 1, Field: "at", Reason: "is not an RFC 3339 time"})
		}
		msg := e.Error()
		if got := strings.Count(msg, "is not an RFC 3339 time"); got != tc.listed {
			t.Errorf("%d errors: message lists %d, want %d", tc.n, got, tc.listed)
		}
		if !strings.HasSuffix(msg, tc.wantTrail) || (tc.wantTrail == "" && strings.Contains(msg, "more")) {
			t.Errorf("%d errors: message ends %q, want %q", tc.n, msg[max(0, len(msg)-30):], tc.wantTrail)
		}
		if !strings.HasPrefix(msg, "invalid input: "+fmt.Sprint(e.Fields[0].String())) {
			t.Errorf("%d errors: message starts %q", tc.n, msg[:min(len(msg), 60)])
		}
		if len(e.Fields) != tc.n {
			t.Errorf("Fields holds %d, want %d", len(e.Fields), tc.n)
		}
	}
}
