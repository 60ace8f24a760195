// Package web serves kelvard's own pages from the same binary as the API:
// server-rendered HTML (html/template), SVG charts drawn on the server,
// and a style sheet embedded in the binary. Nothing is loaded from the
// network and no script runs in the browser.
//
// People sign in with an API token; the session is a signed cookie (see
// session.go). A viewer sees; a planner or an admin may also acknowledge
// and suppress findings and approve, schedule, complete and cancel work
// orders. Every store call runs under the token's
// principal (store.WithPrincipal), so a token limited to some sites sees
// only those sites on every page.
//
// The package does not import api, and api does not import it: main.go
// builds a Handler and gives it to the API server as its page handler
// (api.Config.Pages), which serves every path the API does not own.
package web

import (
	"context"
	"crypto/rand"
	"encoding/base64"
	"errors"
	"fmt"
	"html/template"
	"log/slog"
	"net/http"
	"slices"
	"strings"
	"time"

	"kelvard/store"
)

// Config tunes the pages.
type Config struct {
	// SecureCookies marks cookies Secure (and names the session cookie with
	// the __Host- prefix) even on plain HTTP requests: set it when TLS ends
	// at a proxy in front of kelvard. Requests that arrive over TLS get
	// Secure cookies anyway.
	SecureCookies bool
	// SessionKey signs session cookies and form tokens (at least 32
	// bytes). Replicas that share it accept each other's sessions; when
	// empty a random key is made, and sessions end when the process stops.
	SessionKey []byte
	// SessionTTL is how long a sign-in lasts (default 12 h).
	SessionTTL time.Duration
	// Log receives errors; nil discards them.
	Log *slog.Logger
}

// Handler serves the pages. It is an http.Handler and keeps no state
// between requests beyond its configuration and parsed templates.
type Handler struct {
	st    *store.Store
	cfg   Config
	log   *slog.Logger
	pages map[string]*template.Template
	mux   *http.ServeMux
	// handler is mux behind the cross-origin check and security headers.
	handler      http.Handler
	cssPath      string
	printCSSPath string
}

// MinSessionKey is the shortest session key New accepts.
const MinSessionKey = 32

// ParseSessionKey reads a session key written in base64 (standard or
// URL alphabet, padded or not), as the --session-key flag takes it; empty
// gives nil (New then makes a random key).
func ParseSessionKey(s string) ([]byte, error) {
	s = strings.TrimSpace(s)
	if s == "" {
		return nil, nil
	}
	for _, enc := range []*base64.Encoding{base64.StdEncoding, base64.RawStdEncoding, base64.URLEncoding, base64.RawURLEncoding} {
		if b, err := enc.DecodeString(s); err == nil {
			if len(b) < MinSessionKey {
				return nil, fmt.Errorf("session key: want at least %d bytes, got %d (make one with: head -c 32 /dev/urandom | base64)", MinSessionKey, len(b))
			}
			return b, nil
		}
	}
	return nil, errors.New("session key: not base64 (make one with: head -c 32 /dev/urandom | base64)")
}

// New builds the page handler over the store.
func New(st *store.Store, cfg Config) (*Handler, error) {
	if cfg.Log == nil {
		cfg.Log = slog.New(slog.DiscardHandler)
	}
	if cfg.SessionTTL <= 0 {
		cfg.SessionTTL = 12 * time.Hour
	}
	switch {
	case len(cfg.SessionKey) == 0:
		cfg.SessionKey = make([]byte, 32)
		if _, err := rand.Read(cfg.SessionKey); err != nil {
			return nil, fmt.Errorf("make session key: %w", err)
		}
		cfg.Log.Info("no session key given: page sessions end when this process stops and are not shared with other replicas; set KELVARD_SESSION_KEY to keep them")
	case len(cfg.SessionKey) < MinSessionKey:
		return nil, fmt.Errorf("session key: want at least %d bytes, got %d", MinSessionKey, len(cfg.SessionKey))
	}
	h := &Handler{st: st, cfg: cfg, log: cfg.Log, mux: http.NewServeMux()}
	var err error
	if h.pages, err = parsePages(); err != nil {
		return nil, err
	}
	if h.cssPath, err = assetPath("style.css"); err != nil {
		return nil, err
	}
	if h.printCSSPath, err = assetPath("print.css"); err != nil {
		return nil, err
	}
	h.routes()
	cop := http.NewCrossOriginProtection()
	cop.SetDenyHandler(http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		h.errorPage(w, r, http.StatusForbidden, "This form was sent from another site, so it was refused.")
	}))
	h.handler = h.headers(cop.Handler(h.mux))
	return h, nil
}

// ServeHTTP serves a page.
func (h *Handler) ServeHTTP(w http.ResponseWriter, r *http.Request) { h.handler.ServeHTTP(w, r) }

// navItem is one entry of the main navigation. A new page adds an entry
// here and a route in routes; the layout draws whatever the list holds.
type navItem struct {
	Key, Label, Path string
}

// navigation lists the main navigation in order.
func navigation() []navItem {
	return []navItem{
		{Key: "fleet", Label: "Fleet", Path: "/fleet"},
		{Key: "sites", Label: "Sites", Path: "/sites"},
		{Key: "findings", Label: "Findings", Path: "/findings"},
		{Key: "workorders", Label: "Work orders", Path: "/work-orders"},
		{Key: "forecast", Label: "Forecast", Path: "/forecast"},
		{Key: "reliability", Label: "Reliability", Path: "/reliability"},
		{Key: "settings", Label: "Settings", Path: "/settings"},
	}
}

// routes registers every page.
func (h *Handler) routes() {
	m := h.mux
	m.HandleFunc("GET /{$}", func(w http.ResponseWriter, r *http.Request) { http.Redirect(w, r, "/fleet", http.StatusSeeOther) })
	m.HandleFunc("GET /assets/{name}", h.asset)
	m.HandleFunc("GET /favicon.ico", h.favicon)
	m.HandleFunc("GET /signin", h.signinForm)
	m.HandleFunc("POST /signin", h.signin)
	m.HandleFunc("POST /signout", h.action(false, h.signout))

	m.HandleFunc("GET /fleet", h.page(h.fleet))
	m.HandleFunc("GET /sites", h.page(h.sites))
	m.HandleFunc("GET /sites/{id}", h.page(h.site))
	m.HandleFunc("GET /positions/{id}", h.page(h.position))
	m.HandleFunc("GET /drives/{id}", h.page(h.drive))
	m.HandleFunc("GET /findings", h.page(h.findings))
	m.HandleFunc("GET /findings/{id}", h.page(h.finding))
	m.HandleFunc("POST /findings/{id}/acknowledge", h.action(true, h.acknowledge))
	m.HandleFunc("POST /findings/{id}/suppress", h.action(true, h.suppress))
	m.HandleFunc("GET /work-orders", h.page(h.workOrders))
	m.HandleFunc("GET /work-orders/{id}", h.page(h.workOrder))
	m.HandleFunc("GET /work-orders/{id}/print", h.page(h.printWorkOrder))
	m.HandleFunc("POST /work-orders/{id}/approve", h.action(true, h.approveOrder))
	m.HandleFunc("POST /work-orders/{id}/schedule", h.action(true, h.scheduleOrder))
	m.HandleFunc("POST /work-orders/{id}/complete", h.action(true, h.completeOrder))
	m.HandleFunc("POST /work-orders/{id}/cancel", h.action(true, h.cancelOrder))
	m.HandleFunc("GET /forecast", h.page(h.forecast))
	m.HandleFunc("GET /reliability", h.page(h.reliability))
	m.HandleFunc("GET /settings", h.page(h.settings))
	m.HandleFunc("POST /settings", h.action(false, h.saveSettings))
	m.HandleFunc("/", func(w http.ResponseWriter, r *http.Request) {
		h.errorPage(w, r, http.StatusNotFound, "There is no page at this address.")
	})
}

// contentSecurityPolicy allows only kelvard's own style sheet and icon,
// forms posted back to kelvard, no scripts and no framing.
const contentSecurityPolicy = "default-src 'none'; style-src 'self'; img-src 'self'; form-action 'self'; " +
	"frame-ancestors 'none'; base-uri 'none'"

// headers sets the headers every page carries.
func (h *Handler) headers(next http.Handler) http.Handler {
	return http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		hd := w.Header()
		hd.Set("Content-Security-Policy", contentSecurityPolicy)
		hd.Set("X-Content-Type-Options", "nosniff")
		hd.Set("Referrer-Policy", "same-origin")
		hd.Set("X-Frame-Options", "DENY")
		hd.Set("Cache-Control", "no-store")
		next.ServeHTTP(w, r)
	})
}

// viewer is who is looking at a page: the token behind the session, the
// form token, and the display units.
type viewer struct {
	Token  store.Token
	CSRF   string
	Units  Units
	CanAct bool
}

type viewerKey struct{}

// viewerFrom returns the viewer the page or action wrapper put on ctx.
func viewerFrom(ctx context.Context) *viewer {
	v, _ := ctx.Value(viewerKey{}).(*viewer)
	return v
}

// canAct reports whether a role may change things on the pages: planner
// and admin (an ingest token posts readings and nothing else).
func canAct(r store.Role) bool {
	return slices.Contains([]store.Role{store.RolePlanner, store.RoleAdmin}, r)
}

// authenticate reads and checks the session cookie and returns the viewer
// with the request's context carrying the token's principal.
func (h *Handler) authenticate(r *http.Request) (*viewer, *http.Request, error) {
	c, err := r.Cookie(h.sessionCookieName(r))
	if err != nil {
		return nil, r, errBadSession
	}
	s, sum, err := parseSession(c.Value, h.st.Now())
	if err != nil {
		return nil, r, err
	}
	t, err := h.st.SessionToken(r.Context(), s.TokenID)
	if errors.Is(err, store.ErrUnauthenticated) {
		return nil, r, errBadSession
	}
	if err != nil {
		return nil, r, err
	}
	if !checkSession(h.cfg.SessionKey, s, sum, t.Hash) {
		return nil, r, errBadSession
	}
	if t.SessionsAfter != nil && s.IssuedAt.Before(*t.SessionsAfter) {
		return nil, r, errBadSession // signed out since
	}
	v := &viewer{Token: t, CSRF: csrfToken(h.cfg.SessionKey, s), CanAct: canAct(t.Role)}
	if uc, err := r.Cookie(unitsCookie); err == nil {
		v.Units = unitsFromCookie(uc.Value)
	}
	ctx := store.WithPrincipal(r.Context(), t.Principal())
	ctx = context.WithValue(ctx, viewerKey{}, v)
	return v, r.WithContext(ctx), nil
}

// page wraps a GET page: without a valid session the browser is sent to
// sign in and brought back afterwards.
func (h *Handler) page(fn func(http.ResponseWriter, *http.Request)) http.HandlerFunc {
	return func(w http.ResponseWriter, r *http.Request) {
		_, r2, err := h.authenticate(r)
		if errors.Is(err, errBadSession) {
			http.Redirect(w, r, "/signin?next="+urlQueryEscape(r.URL.RequestURI()), http.StatusSeeOther)
			return
		}
		if err != nil {
			h.serverError(w, r, err)
			return
		}
		fn(w, r2)
	}
}

// action wraps a form post: it needs a valid session and the session's
// form token, and with planner the planner or admin role.
func (h *Handler) action(planner bool, fn func(http.ResponseWriter, *http.Request)) http.HandlerFunc {
	return func(w http.ResponseWriter, r *http.Request) {
		r.Body = http.MaxBytesReader(w, r.Body, 64<<10)
		v, r2, err := h.authenticate(r)
		if errors.Is(err, errBadSession) {
			h.errorPage(w, r, http.StatusUnauthorized, "Your session has ended. Sign in again, then repeat what you were doing.")
			return
		}
		if err != nil {
			h.serverError(w, r, err)
			return
		}
		if err := r2.ParseForm(); err != nil {
			h.errorPage(w, r2, http.StatusBadRequest, "The form could not be read.")
			return
		}
		if !sameToken(r2.PostForm.Get("csrf"), v.CSRF) {
			h.errorPage(w, r2, http.StatusForbidden, "This form has expired or did not come from this page. Go back, reload the page and try again.")
			return
		}
		if planner && !v.CanAct {
			h.errorPage(w, r2, http.StatusForbidden, "Your token has the "+string(v.Token.Role)+" role; acting on findings and work orders needs the planner role.")
			return
		}
		fn(w, r2)
	}
}
