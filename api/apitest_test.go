package api_test

import (
	"bytes"
	"context"
	"encoding/json"
	"io"
	"net/http"
	"net/http/httptest"
	"strings"
	"testing"

	"kelvard/api"
	"kelvard/store"
	"kelvard/store/storetest"
)

// harness is a kelvard API over a fresh store, with an admin token.
type harness struct {
	t     *testing.T
	store *store.Store
	srv   *api.Server
	http  *httptest.Server
	admin string
}

type apiConfig = api.Config

func newHarness(t *testing.T, d store.Dialect) *harness {
	t.Helper()
	return newHarnessWith(t, storetest.Open(t, d), nil)
}

// newHarnessWith builds a harness on st with the config changed by edit.
func newHarnessWith(t *testing.T, st *store.Store, edit func(*api.Config)) *harness {
	t.Helper()
	cfg := api.Config{Version: "test"}
	if edit != nil {
		edit(&cfg)
	}
	srv, err := api.New(cfg, st, nil)
	if err != nil {
		t.Fatal(err)
	}
	h := &harness{t: t, store: st, srv: srv, http: httptest.NewServer(srv)}
	t.Cleanup(h.http.Close)
	h.admin = h.token(store.RoleAdmin, nil)
	return h
}

// token makes a token with the role, limited to sites when given.
func (h *harness) token(role store.Role, sites []int64) string {
	h.t.Helper()
	_, secret, err := h.store.CreateToken(context.Background(), store.NewToken{Name: string(role), Role: role, Sites: sites})
	if err != nil {
		h.t.Fatal(err)
	}
	return secret
}

// answer is a decoded response.
type answer struct {
	status int
	header http.Header
	body   []byte
}

func (a answer) json(t *testing.T, v any) {
	t.Helper()
	if err := json.Unmarshal(a.body, v); err != nil {
		t.Fatalf("decode %s: %v", a.body, err)
	}
}

// problem decodes a problem answer and checks its media type.
func (a answer) problem(t *testing.T) api.Problem {
	t.Helper()
	if ct := a.header.Get("Content-Type"); ct != "application/problem+json" {
		t.Errorf("problem answer has Content-Type %q", ct)
	}
	var p api.Problem
	a.json(t, &p)
	return p
}

// fields lists the fields a problem names.
func (p problemFields) has(field string) bool {
	for _, f := range p {
		if f == field {
			return true
		}
	}
	return false
}

type problemFields []string

func fieldsOf(p api.Problem) problemFields {
	var out problemFields
	for _, e := range p.Errors {
		out = append(out, e.Field)
	}
	return out
}

// do sends a request; body may be nil, a string or a value to encode.
func (h *harness) do(method, path, token string, body any) answer {
	h.t.Helper()
	var r io.Reader
	ctype := "application/json"
	switch b := body.(type) {
	case nil:
	case string:
		r = strings.NewReader(b)
	case []byte:
		r = bytes.NewReader(b)
	default:
		enc, err := json.Marshal(b)
		if err != nil {
			h.t.Fatal(err)
		}
		r = bytes.NewReader(enc)
	}
	req, err := http.NewRequest(method, h.http.URL+path, r)
	if err != nil {
		h.t.Fatal(err)
	}
	if r != nil {
		req.Header.Set("Content-Type", ctype)
	}
	if token != "" {
		req.Header.Set("Authorization", "Bearer "+token)
	}
	resp, err := h.http.Client().Do(req)
	if err != nil {
		h.t.Fatal(err)
	}
	defer resp.Body.Close()
	data, err := io.ReadAll(resp.Body)
	if err != nil {
		h.t.Fatal(err)
	}
	return answer{status: resp.StatusCode, header: resp.Header, body: data}
}

// must sends a request and fails the test unless the status matches.
func (h *harness) must(want int, method, path, token string, body any) answer {
	h.t.Helper()
	a := h.do(method, path, token, body)
	if a.status != want {
		h.t.Fatalf("%s %s: status %d, want %d: %s", method, path, a.status, want, a.body)
	}
	return a
}

// create posts an object and returns its id.
func (h *harness) create(path string, body any) int64 {
	h.t.Helper()
	var v struct {
		ID int64 `json:"id"`
	}
	h.must(http.StatusCreated, http.MethodPost, path, h.admin, body).json(h.t, &v)
	return v.ID
}

// forEachStore runs f on PostgreSQL and SQLite in parallel.
func forEachStore(t *testing.T, f func(t *testing.T, h *harness)) {
	t.Helper()
	for _, d := range storetest.Dialects {
		t.Run(string(d), func(t *testing.T) {
			t.Parallel()
			f(t, newHarness(t, d))
		})
	}
}
