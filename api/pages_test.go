package api_test

import (
	"io"
	"net/http"
	"strings"
	"sync"
	"testing"

	"kelvard/api"
	"kelvard/store/storetest"
)

// TestPagesMount checks the page hook: every path outside /api/ that no
// API route owns goes to Config.Pages with its own status and headers;
// the API's paths, and unknown paths under /api/, stay the API's.
func TestPagesMount(t *testing.T) {
	t.Parallel()
	st := storetest.Open(t, storetest.Dialects[1])
	var (
		mu   sync.Mutex
		seen []string
	)
	pages := http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		mu.Lock()
		seen = append(seen, r.Method+" "+r.URL.Path)
		mu.Unlock()
		switch r.URL.Path {
		case "/missing":
			http.Error(w, "no page", http.StatusNotFound)
		case "/signin":
			w.Header().Set("Cache-Control", "private")
			w.Write([]byte("<p>form</p>"))
		default:
			w.Header().Set("Content-Type", "text/html; charset=utf-8")
			w.Write([]byte("<p>page</p>"))
		}
	})
	h := newHarnessWith(t, st, func(c *api.Config) { c.Pages = pages })
	get := func(method, path string) (int, string, http.Header) {
		req, _ := http.NewRequest(method, h.http.URL+path, nil)
		res, err := http.DefaultClient.Do(req)
		if err != nil {
			t.Fatal(err)
		}
		defer res.Body.Close()
		b, _ := io.ReadAll(res.Body)
		return res.StatusCode, string(b), res.Header
	}
	for _, tc := range []struct {
		method, path string
		status       int
		body         string
	}{
		{"GET", "/", 200, "<p>page</p>"},
		{"GET", "/fleet", 200, "<p>page</p>"},
		{"GET", "/drives/12", 200, "<p>page</p>"},
		{"POST", "/signin", 200, "<p>form</p>"},
		{"GET", "/missing", 404, "no page\n"},
	} {
		status, body, _ := get(tc.method, tc.path)
		if status != tc.status || body != tc.body {
			t.Errorf("%s %s: %d %q, want %d %q", tc.method, tc.path, status, body, tc.status, tc.body)
		}
	}
	if _, _, hd := get("GET", "/signin"); hd.Get("Cache-Control") != "private" || hd.Get("X-Content-Type-Options") != "nosniff" {
		t.Errorf("page headers: %v", hd)
	}
	mu.Lock()
	n := len(seen)
	mu.Unlock()
	status, body, hd := get("GET", "/api/v1/nothing-here")
	if status != http.StatusNotFound || hd.Get("Content-Type") != "application/problem+json" || !strings.Contains(body, "openapi") {
		t.Errorf("unknown API path: %d %s %q", status, hd.Get("Content-Type"), body)
	}
	if status, _, _ := get("GET", "/healthz"); status != http.StatusOK {
		t.Errorf("/healthz: %d", status)
	}
	mu.Lock()
	defer mu.Unlock()
	if len(seen) != n {
		t.Errorf("the pages saw API paths: %v", seen[n:])
	}
}
