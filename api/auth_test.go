package api_test

import (
	"fmt"
	"net/http"
	"slices"
	"strings"
	"testing"
	"time"

	"kelvard/store"
	"kelvard/store/storetest"
)

// TestAPI5FunctionLevelAuthorization walks every registered route with
// every role and with no token (OWASP API Security Top 10 2023, API5:
// broken function level authorization).
func TestAPI5FunctionLevelAuthorization(t *testing.T) {
	t.Parallel()
	h := newHarness(t, storetest.Dialects[1])
	f := h.buildFleet("a")
	tokens := map[store.Role]string{store.RoleAdmin: h.admin}
	for _, r := range store.Roles() {
		if r != store.RoleAdmin {
			tokens[r] = h.token(r, nil)
		}
	}
	rank := func(r store.Role) int { return slices.Index(store.Roles(), r) }
	ids := strings.NewReplacer(":id", fmt.Sprint(f.drive), ":cid", "1", ":iid", "1")
	for _, rt := range h.srv.Routes() {
		path := ids.Replace(rt.Path)
		if strings.HasPrefix(rt.Path, "/api/v1/sites/") {
			path = ids.Replace(strings.Replace(rt.Path, ":id", fmt.Sprint(f.site), 1))
		}
		t.Run(rt.Method+" "+rt.Path, func(t *testing.T) {
			a := h.do(rt.Method, path, "", "{}")
			if rt.Role == "" {
				if a.status == http.StatusUnauthorized || a.status == http.StatusForbidden {
					t.Errorf("open route answered %d without a token", a.status)
				}
				return
			}
			if a.status != http.StatusUnauthorized {
				t.Errorf("no token: %d, want 401", a.status)
			}
			for role, tok := range tokens {
				if rt.Method == http.MethodDelete && role == store.RoleAdmin {
					continue // keep the fixture; admin is checked by the other methods
				}
				a := h.do(rt.Method, path, tok, "{}")
				allowed := rank(role) >= rank(rt.Role)
				switch {
				case allowed && (a.status == http.StatusUnauthorized || a.status == http.StatusForbidden):
					t.Errorf("%s: %d, want it allowed", role, a.status)
				case !allowed && a.status != http.StatusForbidden:
					t.Errorf("%s: %d, want 403", role, a.status)
				}
			}
		})
	}
}

// TestAPI2Authentication checks missing, malformed, wrong, expired and
// revoked tokens (OWASP API Security Top 10 2023, API2: broken
// authentication).
func TestAPI2Authentication(t *testing.T) {
	t.Parallel()
	h := newHarness(t, storetest.Dialects[1])
	expiring, secret, err := h.store.CreateToken(t.Context(), store.NewToken{Name: "short", Role: store.RoleViewer,
		ExpiresAt: new(time.Now().Add(time.Second))})
	if err != nil {
		t.Fatal(err)
	}
	_ = expiring
	revoked := h.token(store.RoleViewer, nil)
	var list []store.Token
	h.must(http.StatusOK, http.MethodGet, "/api/v1/tokens", h.admin, nil).json(t, &list)
	for _, tk := range list {
		if strings.Contains(string(h.do(http.MethodGet, "/api/v1/tokens", h.admin, nil).body), "hash") {
			t.Fatal("token list carries hashes")
		}
		if tk.Role == store.RoleViewer && tk.ExpiresAt == nil {
			h.must(http.StatusNoContent, http.MethodDelete, fmt.Sprintf("/api/v1/tokens/%d", tk.ID), h.admin, nil)
		}
	}
	time.Sleep(1100 * time.Millisecond)
	for name, header := range map[string]string{
		"missing":   "",
		"malformed": "Token abc",
		"empty":     "Bearer ",
		"wrong":     "Bearer kvd_AAAAAAAA_" + strings.Repeat("x", 43),
		"expired":   "Bearer " + secret,
		"revoked":   "Bearer " + revoked,
	} {
		req, _ := http.NewRequest(http.MethodGet, h.http.URL+"/api/v1/sites", nil)
		if header != "" {
			req.Header.Set("Authorization", header)
		}
		resp, err := http.DefaultClient.Do(req)
		if err != nil {
			t.Fatal(err)
		}
		resp.Body.Close()
		if resp.StatusCode != http.StatusUnauthorized {
			t.Errorf("%s token: %d, want 401", name, resp.StatusCode)
		}
		if resp.Header.Get("WWW-Authenticate") == "" {
			t.Errorf("%s token: no WWW-Authenticate header", name)
		}
	}
}

// TestAPI1ObjectLevelAuthorization: a token limited to one site gets 404
// for another site's objects (OWASP API Security Top 10 2023, API1: broken
// object level authorization).
func TestAPI1ObjectLevelAuthorization(t *testing.T) {
	t.Parallel()
	forEachStore(t, func(t *testing.T, h *harness) {
		a := h.buildFleet("a")
		b := h.buildFleet("b")
		limited := h.token(store.RolePlanner, []int64{a.site})
		for _, path := range []string{
			fmt.Sprintf("/api/v1/sites/%d", b.site),
			fmt.Sprintf("/api/v1/areas/%d", b.area),
			fmt.Sprintf("/api/v1/positions/%d", b.position),
			fmt.Sprintf("/api/v1/drives/%d", b.drive),
			fmt.Sprintf("/api/v1/drives/%d/components", b.drive),
			fmt.Sprintf("/api/v1/drives/%d/installations", b.drive),
		} {
			ans := h.do(http.MethodGet, path, limited, nil)
			if strings.HasSuffix(path, "components") || strings.HasSuffix(path, "installations") {
				var page struct{ Items []any }
				ans.json(t, &page)
				if len(page.Items) != 0 {
					t.Errorf("GET %s shows %d items of another site", path, len(page.Items))
				}
				continue
			}
			if ans.status != http.StatusNotFound {
				t.Errorf("GET %s: %d, want 404", path, ans.status)
			}
			if got := h.do(http.MethodPatch, path, limited, map[string]any{"notes": "x"}); got.status != http.StatusNotFound {
				t.Errorf("PATCH %s: %d, want 404", path, got.status)
			}
		}
		// Writes that point into another site are refused too.
		ans := h.do(http.MethodPost, "/api/v1/areas", limited, map[string]any{"site_id": b.site, "name": "Sneaky"})
		if ans.status != http.StatusUnprocessableEntity || !fieldsOf(ans.problem(t)).has("site_id") {
			t.Errorf("create an area at another site: %d %s", ans.status, ans.body)
		}
		ans = h.do(http.MethodPost, fmt.Sprintf("/api/v1/drives/%d/installations", a.drive), limited, map[string]any{"position_id": b.position})
		if ans.status != http.StatusUnprocessableEntity {
			t.Errorf("move into another site's position: %d %s", ans.status, ans.body)
		}
		var drives struct{ Items []store.Drive }
		h.must(http.StatusOK, http.MethodGet, "/api/v1/drives", limited, nil).json(t, &drives)
		if len(drives.Items) != 1 || drives.Items[0].ID != a.drive {
			t.Errorf("limited token lists %d drives", len(drives.Items))
		}
	})
}
