package jobs

import (
	"errors"
	"fmt"
	"strings"
	"testing"

	"kelvard/store"
)

func TestErrorText(t *testing.T) {
	t.Parallel()
	cases := []struct {
		name string
		err  error
		want string
	}{
		{"nil", nil, ""},
		{"plain", errors.New("assess drive 12: no readings"), "assess drive 12: no readings"},
		{"one line", errors.New("read\n\treadings:   timeout"), "read readings: timeout"},
		{"url credentials", errors.New("connect postgres://kelvard:s3cret@db:5432/fleet: refused"),
			"connect postgres://…@db:5432/fleet: refused"},
		{"secret setting", errors.New("dial host=db password=s3cret user=k"), "dial host=db password=… user=k"},
		{"sql", errors.New(`read readings: SELECT * FROM readings WHERE drive_id = 3: timeout`),
			"read readings (database statement omitted)"},
		{"sql insert", errors.New(`write: INSERT INTO findings (rule) VALUES ('x')`), "write (database statement omitted)"},
		{"unavailable", fmt.Errorf("assess: %w: dial tcp: connection refused", store.ErrUnavailable), "the database is unavailable"},
		{"panic", &panicError{value: "index out of range [3] with length 3"}, "panic: index out of range [3] with length 3"},
	}
	for _, c := range cases {
		if got := errorText(c.err); got != c.want {
			t.Errorf("%s: errorText = %q, want %q", c.name, got, c.want)
		}
	}
	long := errorText(errors.New(strings.Repeat("ä", 400)))
	if len(long) > maxErrorText || !strings.HasSuffix(long, "…") || !strings.HasPrefix(long, "ää") {
		t.Errorf("long error cut to %d bytes: %q", len(long), long)
	}
}
