package web

import (
	"context"
	"io"
	"net/http"
	"net/http/cookiejar"
	"net/http/httptest"
	"net/url"
	"strings"
	"testing"
	"time"

	"github.com/PuerkitoBio/goquery"

	"kelvard/jobs"
	"kelvard/store"
	"kelvard/store/demo"
	"kelvard/store/plan"
	"kelvard/store/storetest"
)

// demoNow is the reference time of the demo fleet in testdata/demo.
var demoNow = time.Date(2026, 11, 30, 0, 0, 0, 0, time.UTC)

// fleet is the demo fleet loaded and assessed in one store, served by a
// page handler, with tokens of each role.
type fleet struct {
	st      *store.Store
	h       *Handler
	srv     *httptest.Server
	admin   string
	planner string
	viewer  string
	// limited is a viewer limited to limitedSite.
	limited     string
	limitedSite store.Site
}

// loadFleet loads the demo fleet (store/demo Generate(1, 2026-11-30) and
// Load, then a first assessment, as jobs/demo_test.go does, and a first
// planning pass, as serve --demo does) into a fresh store of dialect d. It
// takes about 20 s.
func loadFleet(tb testing.TB, d store.Dialect) *fleet {
	tb.Helper()
	now := demoNow
	clock := func() time.Time { return now }
	st := storetest.OpenWith(tb, d, store.Options{Now: clock})
	ctx := context.Background()
	if err := demo.Generate(1, demoNow).Load(ctx, st, nil); err != nil {
		tb.Fatal(err)
	}
	if _, err := jobs.NewAssessor(st, jobs.AssessConfig{Now: clock}).Assess(ctx, jobs.AssessOptions{}); err != nil {
		tb.Fatal(err)
	}
	if _, _, err := plan.Refresh(ctx, st, plan.Config{}); err != nil {
		tb.Fatal(err)
	}
	h, err := New(st, Config{SessionKey: []byte(strings.Repeat("k", 32))})
	if err != nil {
		tb.Fatal(err)
	}
	f := &fleet{st: st, h: h, srv: httptest.NewServer(h)}
	tb.Cleanup(f.srv.Close)
	mk := func(role store.Role, sites []int64) string {
		_, secret, err := st.CreateToken(ctx, store.NewToken{Name: "test " + string(role), Role: role, Sites: sites})
		if err != nil {
			tb.Fatal(err)
		}
		return secret
	}
	places, err := st.Places(ctx)
	if err != nil || len(places) < 2 {
		tb.Fatalf("places: %v, %v", places, err)
	}
	f.limitedSite = places[0].Site
	f.admin, f.planner, f.viewer = mk(store.RoleAdmin, nil), mk(store.RolePlanner, nil), mk(store.RoleViewer, nil)
	f.limited = mk(store.RoleViewer, []int64{f.limitedSite.ID})
	return f
}

// client is a browser stand-in: a cookie jar and the last page's form
// token.
type client struct {
	tb   testing.TB
	base string
	http *http.Client
	csrf string
}

// newClient makes a client that does not follow redirects, so tests see
// them.
func (f *fleet) newClient(tb testing.TB) *client {
	jar, _ := cookiejar.New(nil)
	return &client{tb: tb, base: f.srv.URL, http: &http.Client{Jar: jar, CheckRedirect: func(*http.Request, []*http.Request) error {
		return http.ErrUseLastResponse
	}}}
}

// signedIn returns a client signed in with the secret.
func (f *fleet) signedIn(tb testing.TB, secret string) *client {
	tb.Helper()
	c := f.newClient(tb)
	res, doc := c.get("/signin")
	if res.StatusCode != http.StatusOK {
		tb.Fatalf("GET /signin: %d", res.StatusCode)
	}
	csrf, _ := doc.Find(`form[action="/signin"] input[name="csrf"]`).Attr("value")
	res, _ = c.post("/signin", url.Values{"csrf": {csrf}, "token": {secret}})
	if res.StatusCode != http.StatusSeeOther || res.Header.Get("Location") != "/fleet" {
		tb.Fatalf("sign in: %d to %q", res.StatusCode, res.Header.Get("Location"))
	}
	c.get("/fleet")
	if c.csrf == "" {
		tb.Fatal("no form token after signing in")
	}
	return c
}

func (c *client) do(req *http.Request) (*http.Response, *goquery.Document) {
	c.tb.Helper()
	res, err := c.http.Do(req)
	if err != nil {
		c.tb.Fatal(err)
	}
	defer res.Body.Close()
	body, err := io.ReadAll(res.Body)
	if err != nil {
		c.tb.Fatal(err)
	}
	var doc *goquery.Document
	if strings.HasPrefix(res.Header.Get("Content-Type"), "text/html") {
		if doc, err = goquery.NewDocumentFromReader(strings.NewReader(string(body))); err != nil {
			c.tb.Fatal(err)
		}
		if v, ok := doc.Find(`header form[action="/signout"] input[name="csrf"]`).Attr("value"); ok {
			c.csrf = v
		}
	}
	return res, doc
}

func (c *client) get(path string) (*http.Response, *goquery.Document) {
	c.tb.Helper()
	req, err := http.NewRequest(http.MethodGet, c.base+path, nil)
	if err != nil {
		c.tb.Fatal(err)
	}
	return c.do(req)
}

// page gets a page and fails unless it answers 200 with HTML.
func (c *client) page(path string) *goquery.Document {
	c.tb.Helper()
	res, doc := c.get(path)
	if res.StatusCode != http.StatusOK || doc == nil {
		c.tb.Fatalf("GET %s: %d %s", path, res.StatusCode, res.Header.Get("Location"))
	}
	return doc
}

func (c *client) post(path string, form url.Values) (*http.Response, *goquery.Document) {
	c.tb.Helper()
	req, err := http.NewRequest(http.MethodPost, c.base+path, strings.NewReader(form.Encode()))
	if err != nil {
		c.tb.Fatal(err)
	}
	req.Header.Set("Content-Type", "application/x-www-form-urlencoded")
	return c.do(req)
}

// text is the squeezed text of a selection.
func text(s *goquery.Selection) string { return strings.Join(strings.Fields(s.Text()), " ") }

// hasCookie reports whether the answer sets a cookie of that name with a
// value.
func hasCookie(res *http.Response, name string) bool {
	for _, c := range res.Cookies() {
		if c.Name == name && c.Value != "" && c.MaxAge >= 0 {
			return true
		}
	}
	return false
}

// clearsCookie reports whether the answer deletes the cookie.
func clearsCookie(res *http.Response, name string) bool {
	for _, c := range res.Cookies() {
		if c.Name == name && c.MaxAge < 0 {
			return true
		}
	}
	return false
}

// mustSession makes a session cookie value for the token with the secret,
// signed with key.
func mustSession(t *testing.T, key []byte, f *fleet, secret string) string {
	t.Helper()
	tok, err := f.st.Authenticate(context.Background(), secret)
	if err != nil {
		t.Fatal(err)
	}
	v, err := newSessionValue(key, tok.ID, tok.Hash, f.st.Now(), time.Hour)
	if err != nil {
		t.Fatal(err)
	}
	return v
}

// statusWithCookie gets path with one cookie and returns the status.
func statusWithCookie(t *testing.T, f *fleet, name, value, path string) int {
	t.Helper()
	rec := httptestRecorder(f.h, http.MethodGet, path, nil, []*http.Cookie{{Name: name, Value: value}})
	return rec.Code
}

// httptestRecorder serves one request straight from the handler.
func httptestRecorder(h http.Handler, method, path string, form url.Values, cookies []*http.Cookie) *httptest.ResponseRecorder {
	var body io.Reader
	if form != nil {
		body = strings.NewReader(form.Encode())
	}
	req := httptest.NewRequest(method, path, body)
	if form != nil {
		req.Header.Set("Content-Type", "application/x-www-form-urlencoded")
	}
	for _, c := range cookies {
		req.AddCookie(c)
	}
	rec := httptest.NewRecorder()
	h.ServeHTTP(rec, req)
	return rec
}
