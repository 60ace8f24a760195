package api_test

import (
	"net/http"
	"strings"
	"testing"

	"kelvard/store/storetest"
)

// TestLostDatabaseAnswers503: with the connection to PostgreSQL cut
// abruptly, the API answers 503 problems with Retry-After (never 500),
// /readyz turns unready while /healthz stays up, and everything answers
// again once the database is back.
func TestLostDatabaseAnswers503(t *testing.T) {
	t.Parallel()
	st, proxy := storetest.OpenCut(t)
	h := newHarnessWith(t, st, nil)
	f := storetest.Build(t, st, "cut")
	reading := `[{"position":"` + f.Position.Tag + `","at":"2021-02-01T00:00:00Z","ambient_c":21}]`

	proxy.Cut()
	for _, c := range []struct{ method, path, body string }{
		{http.MethodGet, "/api/v1/sites", ""},
		{http.MethodGet, "/api/v1/drives/1/readings", ""},
		{http.MethodPost, "/api/v1/readings", reading},
		{http.MethodGet, "/readyz", ""},
	} {
		var body any
		if c.body != "" {
			body = c.body
		}
		a := h.do(c.method, c.path, h.admin, body)
		p := a.problem(t)
		if a.status != http.StatusServiceUnavailable || a.header.Get("Retry-After") == "" || p.Status != http.StatusServiceUnavailable ||
			!strings.Contains(p.Detail, "database") || p.Instance != c.path {
			t.Errorf("%s %s with the database gone: %d Retry-After %q %+v", c.method, c.path, a.status, a.header.Get("Retry-After"), p)
		}
	}
	if a := h.do(http.MethodGet, "/healthz", "", nil); a.status != http.StatusOK {
		t.Errorf("/healthz with the database gone: %d", a.status)
	}
	proxy.Restore()
	if a := h.do(http.MethodPost, "/api/v1/readings", h.admin, reading); a.status != http.StatusOK {
		t.Errorf("post readings after the database came back: %d %s", a.status, a.body)
	}
	if a := h.do(http.MethodGet, "/readyz", "", nil); a.status != http.StatusOK {
		t.Errorf("/readyz after the database came back: %d %s", a.status, a.body)
	}
}
