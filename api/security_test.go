package api_test

import (
	"fmt"
	"net/http"
	"strings"
	"testing"

	"kelvard/api"
	"kelvard/store"
	"kelvard/store/storetest"
)

// TestAPI3PropertyLevelAuthorization: a PATCH naming a field outside the
// listed ones (identity, timestamps, a token's role or sites) is refused
// with 400 and changes nothing; no answer carries a token hash (OWASP API
// Security Top 10 2023, API3: broken object property level authorization).
func TestAPI3PropertyLevelAuthorization(t *testing.T) {
	t.Parallel()
	forEachStore(t, func(t *testing.T, h *harness) {
		f := h.buildFleet("a")
		var before map[string]any
		h.must(http.StatusOK, http.MethodGet, fmt.Sprintf("/api/v1/drives/%d", f.drive), h.admin, nil).json(t, &before)
		for _, body := range []map[string]any{
			{"id": 99},
			{"created_at": "2020-01-01T00:00:00Z"},
			{"updated_at": "2020-01-01T00:00:00Z"},
			{"position_id": 1},
			{"notes": "ok", "id": 99},
		} {
			a := h.do(http.MethodPatch, fmt.Sprintf("/api/v1/drives/%d", f.drive), h.admin, body)
			if a.status != http.StatusBadRequest {
				t.Errorf("PATCH %v: %d, want 400", body, a.status)
			}
		}
		var after map[string]any
		h.must(http.StatusOK, http.MethodGet, fmt.Sprintf("/api/v1/drives/%d", f.drive), h.admin, nil).json(t, &after)
		if fmt.Sprint(before) != fmt.Sprint(after) {
			t.Errorf("refused PATCHes changed the drive:\n%v\n%v", before, after)
		}
		// Tokens: the answer to a create and every list leave the hash out.
		a := h.must(http.StatusCreated, http.MethodPost, "/api/v1/tokens", h.admin, map[string]any{"name": "gw", "role": "ingest"})
		list := h.must(http.StatusOK, http.MethodGet, "/api/v1/tokens", h.admin, nil)
		for _, body := range [][]byte{a.body, list.body} {
			if strings.Contains(strings.ToLower(string(body)), "hash") {
				t.Errorf("a token answer carries a hash: %s", body)
			}
		}
		// A token's role and sites are not fields anyone can PATCH.
		if a := h.do(http.MethodPatch, "/api/v1/tokens/1", h.admin, map[string]any{"role": "admin"}); a.status != http.StatusMethodNotAllowed && a.status != http.StatusNotFound {
			t.Errorf("PATCH a token: %d", a.status)
		}
	})
}

// TestAPI4ResourceConsumption: bodies over the limit answer 413, and a
// token over its rate answers 429 with Retry-After while another token is
// unaffected (OWASP API Security Top 10 2023, API4: unrestricted resource
// consumption). Server timeouts are set on the http.Server.
func TestAPI4ResourceConsumption(t *testing.T) {
	t.Parallel()
	st := storetest.Open(t, storetest.Dialects[1])
	h := newHarnessWith(t, st, func(c *api.Config) { c.RateLimit, c.RateBurst, c.MaxBodyBytes = 2, 3, 1024 })
	big := `{"name":"` + strings.Repeat("x", 2048) + `"}`
	if a := h.do(http.MethodPost, "/api/v1/sites", h.admin, big); a.status != http.StatusRequestEntityTooLarge {
		t.Errorf("oversized body: %d, want 413", a.status)
	}
	other := h.token(store.RoleViewer, nil)
	limited := 0
	for i := 0; i < 10; i++ {
		a := h.do(http.MethodGet, "/api/v1/sites", h.admin, nil)
		if a.status == http.StatusTooManyRequests {
			limited++
			if a.header.Get("Retry-After") == "" {
				t.Error("429 without Retry-After")
			}
		}
	}
	if limited == 0 {
		t.Error("ten quick requests at 2 per second (burst 3) were never limited")
	}
	if a := h.do(http.MethodGet, "/api/v1/sites", other, nil); a.status != http.StatusOK {
		t.Errorf("another token was limited too: %d", a.status)
	}
	hs := h.srv.HTTPServer(":0")
	if hs.ReadHeaderTimeout == 0 || hs.ReadTimeout == 0 || hs.WriteTimeout == 0 || hs.IdleTimeout == 0 {
		t.Errorf("server timeouts not all set: %+v", hs)
	}
}

// TestAPI8SecurityMisconfiguration: answers carry the secure headers, and
// error bodies hold no SQL, stack or driver text even when the database is
// gone (OWASP API Security Top 10 2023, API8: security misconfiguration).
func TestAPI8SecurityMisconfiguration(t *testing.T) {
	t.Parallel()
	st := storetest.Open(t, storetest.Dialects[1])
	h := newHarnessWith(t, st, nil)
	a := h.must(http.StatusOK, http.MethodGet, "/api/v1/sites", h.admin, nil)
	for header, want := range map[string]string{"X-Content-Type-Options": "nosniff", "X-Frame-Options": "DENY", "Referrer-Policy": "no-referrer", "Cache-Control": "no-store"} {
		if got := a.header.Get(header); got != want {
			t.Errorf("%s = %q, want %q", header, got, want)
		}
	}
	st.Close()
	for _, path := range []string{"/api/v1/drives/1", "/api/v1/sites", "/readyz"} {
		a := h.do(http.MethodGet, path, "", nil)
		if path != "/readyz" {
			// Without a database the token cannot even be checked.
			a = h.do(http.MethodGet, path, h.admin, nil)
		}
		body := strings.ToLower(string(a.body))
		for _, leak := range []string{"select", "sql", "goroutine", ".go:", "sqlite", "database is closed", "pgx"} {
			if strings.Contains(body, leak) {
				t.Errorf("GET %s (%d) leaks %q: %s", path, a.status, leak, a.body)
			}
		}
		if a.status < 500 {
			t.Errorf("GET %s with the database closed: %d, want 5xx", path, a.status)
		}
	}
}
